// skerry-lineage-bench: builds a large store in the real schema (by default 10
// islands x 1,000 genomes x 1,000 generations = 10M genomes), bred by the
// engine's own Breed / ChooseEmigrants on sphere scores, then times the lineage
// queries against the bare recursive SQL and, with --coordinator, measures the
// resident memory of a real skerry-coordinator serving that database.
//
//   skerry-lineage-bench [--db FILE] [--generations N] [--islands N]
//       [--population N] [--repeat N] [--reuse] [--keep]
//       [--coordinator PATH-TO-skerry-coordinator]
//
// Figures go to stdout, each as the median and range of --repeat timed runs
// after a warm-up, with the load average at the start and the end; nothing
// here is asserted (see docs/performance.md).
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "common/genes.h"
#include "common/spec.h"
#include "grpcpp/grpcpp.h"
#include "server/engine/breeder.h"
#include "server/engine/topology.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/lineage_service.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "skerry/v1/lineage.grpc.pb.h"

namespace {

using skerry::store::GenomeRecord;
using skerry::v1::GenomeRef;
using skerry::v1::LineageNode;

struct Flags {
  std::string db = "/tmp/skerry-lineage-bench.db";
  uint32_t generations = 1000, islands = 10, population = 1000, repeat = 5;
  bool reuse = false, keep = false;
  std::string coordinator;
};

bool ParseFlags(int argc, char** argv, Flags* f) {
  for (int i = 1; i < argc; ++i) {
    std::string a = argv[i];
    auto next = [&](uint32_t* v) {
      return i + 1 < argc && absl::SimpleAtoi(argv[++i], v) && *v > 0;
    };
    bool ok = true;
    if (a == "--db" && i + 1 < argc) {
      f->db = argv[++i];
    } else if (a == "--coordinator" && i + 1 < argc) {
      f->coordinator = argv[++i];
    } else if (a == "--generations") {
      ok = next(&f->generations);
    } else if (a == "--islands") {
      ok = next(&f->islands);
    } else if (a == "--population") {
      ok = next(&f->population);
    } else if (a == "--repeat") {
      ok = next(&f->repeat);
    } else if (a == "--reuse") {
      f->reuse = true;
    } else if (a == "--keep") {
      f->keep = true;
    } else {
      ok = false;
    }
    if (!ok) {
      std::fprintf(stderr,
                   "skerry-lineage-bench: bad argument '%s' (see the "
                   "header of bench/lineage_bench.cc)\n",
                   a.c_str());
      return false;
    }
  }
  return true;
}

double Seconds(std::chrono::steady_clock::time_point since) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - since)
      .count();
}

void Die(const absl::Status& s, const char* what) {
  std::fprintf(stderr, "skerry-lineage-bench: %s: %s\n", what,
               std::string(s.message()).c_str());
  std::exit(1);
}

skerry::v1::RunSpec BenchSpec(const Flags& f) {
  skerry::v1::RunSpec spec;
  spec.set_name("lineage-bench");
  spec.set_seed(20240501);
  spec.set_genome_length(10);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(f.population);
  spec.mutable_ga()->mutable_selection()->set_method(skerry::v1::TOURNAMENT);
  spec.mutable_ga()->mutable_selection()->set_tournament_size(3);
  spec.mutable_ga()->mutable_crossover()->set_method(skerry::v1::UNIFORM);
  spec.mutable_ga()->mutable_crossover()->set_rate(0.8);
  spec.mutable_ga()->mutable_mutation()->set_rate(0.1);
  spec.mutable_ga()->mutable_mutation()->set_step(0.3);
  spec.mutable_ga()->set_elites(2);
  spec.mutable_ga()->set_immigrants(2);
  spec.mutable_islands()->set_count(f.islands);
  spec.mutable_islands()->set_topology(skerry::v1::RING);
  spec.mutable_islands()->set_interval(10);
  spec.mutable_islands()->set_migrants(5);
  spec.mutable_stop()->set_max_generations(f.generations);
  absl::StatusOr<skerry::v1::RunSpec> prepared = skerry::PrepareSpec(spec);
  if (!prepared.ok()) Die(prepared.status(), "bench spec");
  return *prepared;
}

double Sphere(const std::vector<double>& x) {
  double s = 0;
  for (double v : x) s += v * v;
  return s;
}

// Breeds the whole run with the engine's operators and inserts it in big
// transactions on a connection of our own.
void Build(const Flags& f) {
  std::filesystem::remove(f.db);
  std::filesystem::remove(f.db + "-wal");
  std::filesystem::remove(f.db + "-shm");
  const skerry::v1::RunSpec spec = BenchSpec(f);
  {
    auto store = skerry::store::Store::Open(f.db);
    if (!store.ok()) Die(store.status(), "open store");
    skerry::store::RunRecord run;
    run.name = spec.name();
    run.owner = "bench";
    run.spec = spec;
    run.state = skerry::v1::FINISHED;
    std::vector<GenomeRecord> none;
    absl::Status s = (*store)->CreateRun(&run, &none);
    if (!s.ok()) Die(s, "create run");
  }
  auto conn = skerry::store::Connection::Open(f.db, SQLITE_OPEN_READWRITE);
  if (!conn.ok()) Die(conn.status(), "open");
  (*conn)
      ->Exec("PRAGMA synchronous=OFF; PRAGMA cache_size=-262144")
      .IgnoreError();
  auto ins = (*conn)->Prepare(
      "INSERT INTO genomes (id, run_id, island, generation, slot, origin, "
      "parent_a, parent_b, genes, score, eval_state, attempts) VALUES "
      "(?1, 1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, 2, ?10)");
  if (!ins.ok()) Die(ins.status(), "prepare");
  int64_t next_id = 1;
  int64_t best_id = 0;
  double best = 1e300;
  std::vector<std::vector<GenomeRecord>> current(f.islands);
  const auto start = std::chrono::steady_clock::now();
  (*conn)->Exec("BEGIN").IgnoreError();
  for (uint32_t g = 0; g < f.generations; ++g) {
    std::vector<std::vector<GenomeRecord>> next(f.islands);
    for (uint32_t i = 0; i < f.islands; ++i) {
      if (g == 0) {
        next[i] = skerry::engine::Seed(spec, i);
      } else {
        std::vector<const GenomeRecord*> migrants;
        if (skerry::engine::IsMigrationEpoch(spec, g)) {
          for (uint32_t src : skerry::engine::Sources(spec, i, g)) {
            for (const GenomeRecord* m : skerry::engine::ChooseEmigrants(
                     spec, current[src], i, spec.islands().migrants())) {
              migrants.push_back(m);
            }
          }
        }
        auto bred = skerry::engine::Breed(spec, i, current[i], migrants);
        if (!bred.ok()) Die(bred.status(), "breed");
        next[i] = std::move(*bred);
      }
      for (GenomeRecord& r : next[i]) {
        r.id = next_id++;
        r.run_id = 1;
        if (r.state != skerry::v1::EVALUATED) {
          r.score = Sphere(r.genes);
          r.state = skerry::v1::EVALUATED;
          r.attempts = 1;
        }
        if (r.score < best) {
          best = r.score;
          best_id = r.id;
        }
        ins->BindInt(1, r.id);
        ins->BindInt(2, r.island);
        ins->BindInt(3, r.generation);
        ins->BindInt(4, r.slot);
        ins->BindInt(5, r.origin);
        ins->BindIdOrNull(6, r.parent_a);
        ins->BindIdOrNull(7, r.parent_b);
        ins->BindBlob(8, skerry::PackGenes(r.genes));
        ins->BindDouble(9, r.score);
        ins->BindInt(10, r.attempts);
        absl::Status s = ins->Run();
        if (!s.ok()) Die(s, "insert");
      }
    }
    current = std::move(next);
    if (g % 20 == 19 || g + 1 == f.generations) {
      (*conn)->Exec("COMMIT").IgnoreError();
      (*conn)->Exec("PRAGMA wal_checkpoint(TRUNCATE)").IgnoreError();
      std::fprintf(stderr, "\rbuilt %u/%u generations (%.0f s)", g + 1,
                   f.generations, Seconds(start));
      if (g + 1 < f.generations) (*conn)->Exec("BEGIN").IgnoreError();
    }
  }
  std::fprintf(stderr, "\n");
  absl::Status s = (*conn)->Exec(
      absl::StrCat("UPDATE islands SET generation = ", f.generations - 1,
                   ", done = 1; UPDATE runs SET champion_id = ", best_id,
                   ", best_score = ", best, ", evaluations = ", next_id - 1));
  if (!s.ok()) Die(s, "finish");
  std::printf("build: %lld genomes in %.1f s; file %.2f GB\n",
              static_cast<long long>(next_id - 1), Seconds(start),
              std::filesystem::file_size(f.db) / 1e9);
}

// Wall-clock times of `repeat` runs after one warm-up run, in ms.
struct Timing {
  double min = 0, median = 0, max = 0;
};

Timing TimeMs(uint32_t repeat, const std::function<uint64_t()>& fn,
              uint64_t* answer) {
  *answer = fn();
  std::vector<double> ms;
  for (uint32_t r = 0; r < repeat; ++r) {
    const auto t = std::chrono::steady_clock::now();
    fn();
    ms.push_back(Seconds(t) * 1e3);
  }
  std::sort(ms.begin(), ms.end());
  return Timing{ms.front(), ms[ms.size() / 2], ms.back()};
}

// The 1-minute load average, to say how busy the machine was.
std::string LoadAverage() {
  std::ifstream in("/proc/loadavg");
  std::string one;
  in >> one;
  return one.empty() ? "unknown" : one;
}

GenomeRef Key(uint32_t island, uint32_t gen, uint32_t slot) {
  GenomeRef r;
  r.mutable_key()->set_run_id(1);
  r.mutable_key()->set_island(island);
  r.mutable_key()->set_generation(gen);
  r.mutable_key()->set_slot(slot);
  return r;
}

void Report(const std::string& what, const Timing& t, uint64_t answer,
            const char* unit) {
  std::printf("%-46s %10.2f ms  [%.2f-%.2f]  (%llu %s)\n", what.c_str(),
              t.median, t.min, t.max, static_cast<unsigned long long>(answer),
              unit);
}

void Ratio(const Timing& t, const Timing& wide, const Timing& bare) {
  std::printf("%-46s %10.2f x  (%.2f x the ids-only query)\n",
              "  ratio to the all-columns bare query", t.median / wide.median,
              t.median / bare.median);
}

// The bare query: the smallest recursive CTE that finds the same ancestors.
uint64_t BareAncestors(skerry::store::Connection* conn, int64_t id,
                       uint32_t oldest) {
  auto s = conn->Prepare(
      "WITH RECURSIVE anc(id, parent_a, parent_b) AS (SELECT id, parent_a, "
      "parent_b FROM genomes WHERE id = ?1 UNION SELECT g.id, g.parent_a, "
      "g.parent_b FROM anc JOIN genomes g ON g.id IN (anc.parent_a, "
      "anc.parent_b) WHERE g.generation >= ?2) SELECT id FROM anc");
  if (!s.ok()) Die(s.status(), "bare query");
  s->BindInt(1, id);
  s->BindInt(2, oldest);
  uint64_t n = 0;
  while (*s->Step()) ++n;
  return n - 1;  // the genome itself
}

// The bare query for the same answer the service gives: the same recursive
// CTE with every column of a node, stepped to the end in SQLite alone.
uint64_t BareWideAncestors(skerry::store::Connection* conn, int64_t id,
                           uint32_t oldest) {
  constexpr char kCols[] =
      "id, run_id, island, generation, slot, origin, parent_a, parent_b, "
      "score, eval_state";
  constexpr char kColsG[] =
      "g.id, g.run_id, g.island, g.generation, g.slot, g.origin, g.parent_a, "
      "g.parent_b, g.score, g.eval_state";
  auto s = conn->Prepare(absl::StrCat(
      "WITH RECURSIVE anc(", kCols, ") AS (SELECT ", kCols,
      " FROM genomes WHERE id = ?1 UNION SELECT ", kColsG,
      " FROM anc JOIN genomes g ON g.id IN (anc.parent_a, anc.parent_b) "
      "WHERE g.generation >= ?2) SELECT ",
      kCols, " FROM anc"));
  if (!s.ok()) Die(s.status(), "bare wide query");
  s->BindInt(1, id);
  s->BindInt(2, oldest);
  uint64_t n = 0;
  while (*s->Step()) ++n;
  return n - 1;
}

// Streams an answer through the reader, counting nodes.
template <typename Request>
uint64_t StreamCount(
    const Request& req,
    absl::Status (skerry::lineage::LineageReader::*query)(
        const Request&,
        const std::function<
            bool(const skerry::lineage::LineageReader::StreamHead&)>&,
        const skerry::lineage::LineageReader::BatchSink&),
    skerry::lineage::LineageReader& reader) {
  uint64_t n = 0;
  absl::Status s = (reader.*query)(
      req, [](const auto&) { return true; },
      [&](skerry::v1::LineageChunk& b) {
        n += b.nodes_size();
        return true;
      });
  if (!s.ok()) Die(s, "stream");
  return n;
}

uint64_t GrpcAncestorsCount(skerry::v1::LineageService::Stub& stub,
                            const skerry::v1::AncestorsRequest& req) {
  grpc::ClientContext ctx;
  skerry::v1::LineageChunk chunk;
  uint64_t n = 0;
  auto r = stub.StreamAncestors(&ctx, req);
  while (r->Read(&chunk)) n += chunk.nodes_size();
  if (!r->Finish().ok()) Die(absl::InternalError("stream"), "grpc");
  return n;
}

void Queries(const Flags& f, skerry::v1::LineageService::Stub* stub) {
  using skerry::lineage::LineageReader;
  auto reader = LineageReader::Open(f.db);
  if (!reader.ok()) Die(reader.status(), "reader");
  auto bare = skerry::store::Connection::Open(f.db, SQLITE_OPEN_READONLY);
  if (!bare.ok()) Die(bare.status(), "bare connection");
  (*bare)->Exec("PRAGMA cache_size=-8192").IgnoreError();
  const uint32_t last = f.generations - 1;
  const uint32_t depth = std::min<uint32_t>(100, last);
  auto late = (*reader)->Resolve(Key(0, last, 17));
  if (!late.ok()) Die(late.status(), "late genome");
  const int64_t late_id = static_cast<int64_t>(late->id());
  uint64_t n = 0;

  const Timing bare_ms = TimeMs(
      f.repeat,
      [&] { return BareAncestors(bare->get(), late_id, last - depth); }, &n);
  Report(absl::StrCat("bare recursive SQL, ids only, depth ", depth), bare_ms,
         n, "ancestors");
  const Timing wide_ms = TimeMs(
      f.repeat,
      [&] { return BareWideAncestors(bare->get(), late_id, last - depth); },
      &n);
  Report(absl::StrCat("bare recursive SQL, all columns, depth ", depth),
         wide_ms, n, "ancestors");
  skerry::v1::AncestorsRequest req;
  *req.mutable_genome() = Key(0, last, 17);
  req.set_max_depth(depth);
  const Timing lib_ms = TimeMs(
      f.repeat,
      [&] { return StreamCount(req, &LineageReader::Ancestors, **reader); },
      &n);
  Report(absl::StrCat("ancestors depth ", depth, " (LineageReader)"), lib_ms, n,
         "ancestors");
  Ratio(lib_ms, wide_ms, bare_ms);
  if (stub != nullptr) {
    const Timing rpc_ms = TimeMs(
        f.repeat, [&] { return GrpcAncestorsCount(*stub, req); }, &n);
    Report(absl::StrCat("ancestors depth ", depth, " (gRPC stream)"), rpc_ms, n,
           "ancestors");
    Ratio(rpc_ms, wide_ms, bare_ms);
  }

  GenomeRef champion;
  champion.set_champion_of_run(1);
  const Timing line_ms = TimeMs(
      f.repeat,
      [&] {
        auto line = (*reader)->LineOfDescent(champion);
        if (!line.ok()) Die(line.status(), "descent");
        return static_cast<uint64_t>(line->steps_size());
      },
      &n);
  Report("line of descent of the champion", line_ms, n, "steps");
  const Timing attr_ms = TimeMs(
      f.repeat,
      [&] {
        auto a = (*reader)->Attribution(champion);
        if (!a.ok()) Die(a.status(), "attribution");
        return static_cast<uint64_t>(a->improvements_size());
      },
      &n);
  Report("attribution of the champion", attr_ms, n, "improvements");

  skerry::v1::DescendantsRequest dreq;
  *dreq.mutable_genome() = Key(0, last / 2, 0);
  dreq.set_max_depth(10);
  const Timing desc_ms = TimeMs(
      f.repeat,
      [&] { return StreamCount(dreq, &LineageReader::Descendants, **reader); },
      &n);
  Report("descendants depth 10 (slot 0 of a mid generation)", desc_ms, n,
         "descendants");

  skerry::v1::CoalescenceRequest creq;
  *creq.mutable_genome() = Key(0, last, 17);
  creq.set_max_depth(depth);
  const Timing coal_ms = TimeMs(
      f.repeat,
      [&] {
        auto c = (*reader)->Coalescence(creq);
        if (!c.ok()) Die(c.status(), "coalescence");
        return static_cast<uint64_t>(c->levels_size());
      },
      &n);
  Report(absl::StrCat("coalescence depth ", depth, " (the same genome)"),
         coal_ms, n, "levels");

  struct Pair {
    const char* what;
    GenomeRef a, b;
  };
  const uint32_t other = f.islands / 2;
  const uint32_t earlier = last >= 100 ? last - 100 : 0;
  for (const Pair& p : {Pair{"common ancestor, same island", Key(0, last, 10),
                             Key(0, last, 20)},
                        Pair{"common ancestor, islands 0 and N/2",
                             Key(0, last, 10), Key(other, last, 20)},
                        Pair{"common ancestor, 0 and N/2, 100 gen apart",
                             Key(0, last, 10), Key(other, earlier, 20)}}) {
    uint32_t back = 0;
    const Timing ms = TimeMs(
        f.repeat,
        [&] {
          auto c = (*reader)->CommonAncestor(p.a, p.b);
          if (!c.ok()) Die(c.status(), "common ancestor");
          back = c->depth_a();
          return c->visited();
        },
        &n);
    Report(absl::StrCat(p.what, " (", back, " gen back)"), ms, n,
           "genomes read");
  }
}

long RssKib(pid_t pid, const char* field) {
  std::ifstream in(absl::StrCat("/proc/", pid, "/status"));
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind(field, 0) == 0)
      return std::atol(line.c_str() + strlen(field) + 1);
  }
  return -1;
}

// Starts the real coordinator on the database, runs the queries through it,
// and reads its resident memory.
void CoordinatorMemory(const Flags& f) {
  int out[2];
  if (pipe(out) != 0) return;
  const pid_t pid = fork();
  if (pid == 0) {
    dup2(out[1], STDOUT_FILENO);
    close(out[0]);
    execl(f.coordinator.c_str(), f.coordinator.c_str(), "--db", f.db.c_str(),
          "--listen", "127.0.0.1:0", static_cast<char*>(nullptr));
    _exit(127);
  }
  close(out[1]);
  FILE* in = fdopen(out[0], "r");
  char line[512] = {0};
  int port = 0;
  if (in != nullptr && std::fgets(line, sizeof(line), in) != nullptr) {
    const char* p = std::strstr(line, "port ");
    if (p != nullptr) port = std::atoi(p + 5);
  }
  if (port == 0) {
    std::fprintf(stderr, "coordinator did not start: %s\n", line);
    kill(pid, SIGTERM);
    waitpid(pid, nullptr, 0);
    return;
  }
  std::printf("coordinator VmRSS after start: %ld KiB\n",
              RssKib(pid, "VmRSS:"));
  auto stub = skerry::v1::LineageService::NewStub(grpc::CreateChannel(
      absl::StrCat("127.0.0.1:", port), grpc::InsecureChannelCredentials()));
  Queries(f, stub.get());
  std::printf(
      "coordinator VmRSS after the queries: %ld KiB (peak VmHWM %ld KiB)\n",
      RssKib(pid, "VmRSS:"), RssKib(pid, "VmHWM:"));
  kill(pid, SIGTERM);
  waitpid(pid, nullptr, 0);
  if (in != nullptr) fclose(in);
}

}  // namespace

int main(int argc, char** argv) {
  Flags f;
  if (!ParseFlags(argc, argv, &f)) return 2;
  if (!f.reuse || !std::filesystem::exists(f.db)) Build(f);
  std::printf(
      "queries (median [min-max] of %u after a warm-up; load average %s):\n",
      f.repeat, LoadAverage().c_str());
  if (f.coordinator.empty()) {
    Queries(f, nullptr);
  } else {
    CoordinatorMemory(f);
  }
  std::printf("load average at the end: %s (%u cores)\n", LoadAverage().c_str(),
              std::thread::hardware_concurrency());
  if (!f.keep) {
    std::filesystem::remove(f.db);
    std::filesystem::remove(f.db + "-wal");
    std::filesystem::remove(f.db + "-shm");
  }
  return 0;
}
