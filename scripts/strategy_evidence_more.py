"""Two more evidence tables for scripts/strategy-evidence (docs/benchmarks.md).

--table without-velocities: double pole WITHOUT velocities (the evaluator's
hide_velocities, GRUAU_DAMPING fitness, the default Elman network of 5 tanh
neurons and a tanh output, 51 genes), seeds 1..N (default 20), every strategy
setting below. The search sees only the damping fitness; after each complete
generation (every island) the best genome of each island is put to the
published success test (skerry-pole-solve-check: 100,000 steps from the
standard start, then at least 200 of the 625 generalisation starts). The first
generation in which one passes counts, with the evaluations of every island up
to it; the run is then ended. A run that spends its budget unsolved is a
failure.

--table functions: Rastrigin and Rosenbrock in 20 dimensions at one equal
evaluation budget, seeds 1..N (default 10); median best value and success
rate (best at most 1e-8, where the run stops).

Both run `skerry local` with 2 in-process workers, one run at a time.
"""
import os
import signal
import sqlite3
import statistics
import struct
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

POLE_BASE = """
name: "two-link-rig-no-velocities"
seed: SEED
objective: MAXIMIZE
evaluator {
  double_pole { hide_velocities: true fitness: GRUAU_DAMPING }
  time_limit_seconds: 60
}
lower_bound: -10
upper_bound: 10
init_lower: -1
init_upper: 1
STRATEGY
stop { max_evaluations: BUDGET }
"""

GA_POLE = """ga {
  population_size: POP
  selection { method: TOURNAMENT tournament_size: 3 }
  crossover { method: UNIFORM rate: 0.5 }
  mutation { rate: 0.1 step: 0.5 }
  elites: 1
}"""

POLE_SETTINGS = [
    ("ga", "GA, 1 island x 100",
     GA_POLE.replace("POP", "100") + "\nislands { count: 1 }"),
    ("ga_islands", "GA, 4 islands x 25 on a ring, 1 migrant every 5",
     GA_POLE.replace("POP", "25") +
     "\nislands { count: 4 topology: RING interval: 5 migrants: 1 }"),
    ("cma_es", "CMA-ES, 1 island, default lambda (15 for 51 genes), sigma 0.6",
     "strategy { cma_es { } }\nislands { count: 1 }"),
    ("ipop_cma_es", "IPOP-CMA-ES, 1 island, lambda 15 doubled per restart",
     "strategy { cma_es { ipop { } } }\nislands { count: 1 }"),
    ("sep_cma_es", "sep-CMA-ES, 1 island, default lambda, sigma 0.6",
     "strategy { sep_cma_es { } }\nislands { count: 1 }"),
]

FUNCTION_BASE = """
name: "FUNCTION-20"
seed: SEED
genome_length: 20
objective: MINIMIZE
evaluator { builtin { function: "FUNCTION" } }
lower_bound: LOWER
upper_bound: UPPER
init_lower: LOWER
init_upper: UPPER
STRATEGY
stop { max_evaluations: BUDGET target_score: 1e-8 }
"""

# Domains: Jamil & Yang 2013 (../shared/REFERENCES.md).
FUNCTIONS = [("rastrigin", -5.12, 5.12), ("rosenbrock", -5, 10)]

GA_FUNCTION = """ga {
  population_size: POP
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: BLEND rate: 0.9 blend_alpha: 0.25 }
  mutation { rate: 0.1 step: STEP }
  elites: 2
}"""

FUNCTION_SETTINGS = [
    ("ga", "GA, 1 island x 100",
     GA_FUNCTION.replace("POP", "100") + "\nislands { count: 1 }"),
    ("ga_islands", "GA, 4 islands x 25 on a ring, 2 migrants every 5",
     GA_FUNCTION.replace("POP", "25") +
     "\nislands { count: 4 topology: RING interval: 5 migrants: 2 }"),
    ("cma_es", "CMA-ES, 1 island, default lambda (12 for n = 20), sigma 0.3 x "
     "width", "strategy { cma_es { } }\nislands { count: 1 }"),
    ("ipop_cma_es", "IPOP-CMA-ES, 1 island, lambda 12 doubled per restart",
     "strategy { cma_es { ipop { } } }\nislands { count: 1 }"),
]


def run_local(skerry, workdir, key, seed, text):
    spec = os.path.join(workdir, f"{key}-{seed}.spec")
    db = os.path.join(workdir, f"{key}-{seed}.db")
    with open(spec, "w") as f:
        f.write(text)
    proc = subprocess.Popen(
        [skerry, "local", spec, "--workers", "2", "--db", db],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    return spec, db, proc


def remove_db(db):
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(db + suffix):
            os.remove(db + suffix)


def complete_generations(con):
    """Generations that every island has completed, in order."""
    rows = con.execute(
        "SELECT island, MAX(generation) FROM generation_stats GROUP BY island"
    ).fetchall()
    islands = con.execute("SELECT COUNT(*) FROM islands").fetchone()[0]
    if not rows or len(rows) < islands:
        return -1
    return min(r[1] for r in rows)


def best_genes(con, generation):
    out = []
    for (island,) in con.execute(
            "SELECT DISTINCT island FROM generation_stats ORDER BY island"):
        row = con.execute(
            "SELECT genes FROM genomes WHERE island = ? AND generation = ? "
            "AND eval_state = 2 ORDER BY score DESC, slot LIMIT 1",
            (island, generation)).fetchone()
        if row is not None:
            blob = row[0]
            out.append(struct.unpack(f"<{len(blob) // 8}d", blob))
    return out


def pole_run(skerry, checker, workdir, key, seed, text):
    """(evaluations to solve or None, evaluations spent)."""
    spec, db, proc = run_local(skerry, workdir, key, seed, text)
    check = subprocess.Popen([checker, spec], stdin=subprocess.PIPE,
                             stdout=subprocess.PIPE, text=True)
    checked, solved_at = -1, None
    deadline = time.monotonic() + 3600
    try:
        while solved_at is None and time.monotonic() < deadline:
            finished = proc.poll() is not None
            if os.path.exists(db):
                con = sqlite3.connect(db, timeout=30)
                try:
                    last = complete_generations(con)
                    for g in range(checked + 1, last + 1):
                        for genes in best_genes(con, g):
                            check.stdin.write(
                                f"{g} " + " ".join(repr(x) for x in genes) +
                                "\n")
                            check.stdin.flush()
                            answer = check.stdout.readline().split()
                            if len(answer) != 3:
                                sys.exit(f"{checker} gave no answer")
                            if int(answer[2]) >= 200:
                                solved_at = g
                                break
                        checked = g
                        if solved_at is not None:
                            break
                finally:
                    con.close()
            if finished:
                break
            time.sleep(0.5)
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=60)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
        check.stdin.close()
        check.wait()
    if solved_at is None and proc.returncode not in (0, None):
        sys.exit(f"skerry local failed for {key} seed {seed}:\n"
                 f"{proc.stderr.read()}")
    con = sqlite3.connect(db)
    try:
        spent = con.execute(
            "SELECT COALESCE(SUM(evaluations), 0) FROM generation_stats"
        ).fetchone()[0]
        used = None
        if solved_at is not None:
            used = con.execute(
                "SELECT SUM(evaluations) FROM generation_stats "
                "WHERE generation <= ?", (solved_at,)).fetchone()[0]
    finally:
        con.close()
    remove_db(db)
    return used, spent


def function_run(skerry, workdir, key, seed, text):
    spec, db, proc = run_local(skerry, workdir, key, seed, text)
    _, err = proc.communicate()
    if proc.returncode != 0:
        sys.exit(f"skerry local failed for {key} seed {seed}:\n{err}")
    con = sqlite3.connect(db)
    try:
        best, spent = con.execute(
            "SELECT MIN(best), COALESCE(SUM(evaluations), 0) "
            "FROM generation_stats").fetchone()
    finally:
        con.close()
    remove_db(db)
    return best, spent


def figures(values):
    if len(values) >= 2:
        q1, _, q3 = statistics.quantiles(values, n=4)
        return f"{statistics.median(values):,.0f} | {q1:,.0f} - {q3:,.0f}"
    if values:
        return f"{values[0]:,.0f} | -"
    return "- | -"


def command(args):
    only = "".join(f" --only {k}" for k in args.only)
    return (f"nice -n 10 scripts/strategy-evidence --table {args.table} "
            f"--seeds {args.seeds} --budget {args.budget}{only}")


def without_velocities(args, skerry, workdir):
    checker = os.path.join(ROOT, args.build_dir, "bench",
                           "skerry-pole-solve-check")
    if not os.access(checker, os.X_OK):
        sys.exit(f"{checker} not found: build target skerry-pole-solve-check")
    rows = []
    for key, description, strategy in POLE_SETTINGS:
        if args.only and key not in args.only:
            continue
        solved, spent_all = [], []
        for seed in range(1, args.seeds + 1):
            text = (POLE_BASE.replace("SEED", str(seed))
                    .replace("STRATEGY", strategy)
                    .replace("BUDGET", str(args.budget)))
            used, spent = pole_run(skerry, checker, workdir, key, seed, text)
            spent_all.append(spent)
            if used is None:
                print(f"{key} seed {seed}: unsolved after {spent} evaluations",
                      file=sys.stderr)
            else:
                solved.append(used)
                print(f"{key} seed {seed}: solved after {used} evaluations",
                      file=sys.stderr)
        rows.append(f"| {description} | {figures(solved)} | "
                    f"{len(solved)}/{args.seeds} |")
    return [
        "| strategy | evaluations to solve, median of solved | quartiles "
        "| solved |",
        "| --- | --- | --- | --- |",
    ] + rows + [
        "| NEAT (Stanley & Miikkulainen 2002; from memory) | 33,184 | - | - |",
        "| ESP (same table; from memory) | 169,466 | - | - |",
    ]


def functions(args, skerry, workdir):
    rows = []
    for function, lower, upper in FUNCTIONS:
        width = upper - lower
        for key, description, strategy in FUNCTION_SETTINGS:
            if args.only and key not in args.only:
                continue
            strategy = strategy.replace("STEP", f"{0.05 * width:g}")
            bests, hits = [], 0
            for seed in range(1, args.seeds + 1):
                text = (FUNCTION_BASE.replace("SEED", str(seed))
                        .replace("FUNCTION", function)
                        .replace("LOWER", f"{lower:g}")
                        .replace("UPPER", f"{upper:g}")
                        .replace("STRATEGY", strategy)
                        .replace("BUDGET", str(args.budget)))
                best, spent = function_run(skerry, workdir, key, seed, text)
                bests.append(best)
                hits += best <= 1e-8
                print(f"{function} {key} seed {seed}: best {best:.3g} after "
                      f"{spent} evaluations", file=sys.stderr)
            q1, q3 = bests[0], bests[0]
            if len(bests) >= 2:
                q1, _, q3 = statistics.quantiles(bests, n=4)
            rows.append(f"| {function}-20 | {description} | "
                        f"{statistics.median(bests):.3g} | {q1:.3g} - "
                        f"{q3:.3g} | {hits}/{args.seeds} |")
    return [
        "| function | strategy | best, median | quartiles | success "
        "(best <= 1e-8) |",
        "| --- | --- | --- | --- | --- |",
    ] + rows


def main(args, skerry, write_doc):
    if args.seeds is None:
        args.seeds = 20 if args.table == "without-velocities" else 10
    if args.budget is None:
        args.budget = 20000 if args.table == "without-velocities" else 100000
    settings = (POLE_SETTINGS if args.table == "without-velocities" else
                FUNCTION_SETTINGS)
    for key in args.only:
        if key not in [s[0] for s in settings]:
            sys.exit(f"--only {key}: no such setting for --table {args.table} "
                     f"(settings: {', '.join(s[0] for s in settings)})")
    start = time.monotonic()
    with tempfile.TemporaryDirectory() as workdir:
        if args.table == "without-velocities":
            lines = without_velocities(args, skerry, workdir)
        else:
            lines = functions(args, skerry, workdir)
    minutes = (time.monotonic() - start) / 60
    text = "\n".join(
        [f"Command: `{command(args)}` ({minutes:.1f} min on this machine, "
         f"2 in-process workers; {args.budget:,} evaluations per run).", ""] +
        lines) + "\n"
    if args.print:
        print(text)
        return
    write_doc(text, f"strategy-evidence-{args.table}")
