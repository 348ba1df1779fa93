// The script of the report and live pages: builds Chart.js charts from the
// runs' data (embedded JSON in a report, /api/ answers on the live page) and
// records what it drew in #script-status, for people and for the browser test.
#include "server/http/report_page.h"

namespace skerry::http {

absl::string_view ReportScript() {
  return R"JS(
"use strict";
(function () {
  // Okabe & Ito (2008), "Color Universal Design": eight colours told apart
  // with every common form of colour blindness. Black last, for the 8th.
  const PALETTE = ["#E69F00", "#56B4E9", "#009E73", "#0072B2", "#D55E00",
                   "#CC79A7", "#F0E442", "#000000"];
  const ORIGIN_COLOUR = {SEEDED: "#000000", ELITE: "#56B4E9",
    CROSSOVER: "#E69F00", MUTATION: "#009E73", IMMIGRANT: "#CC79A7",
    MIGRANT: "#D55E00", DISTRIBUTION: "#0072B2", SAMPLED: "#F0E442"};
  const errors = [];
  function fail(text) {
    errors.push(String(text));
    const el = document.getElementById("script-errors");
    if (el) { el.hidden = false; el.textContent = errors.join("\n"); }
  }
  window.addEventListener("error", function (e) { fail(e.message); });

  // Protobuf's JSON mapping writes 64-bit integers and non-finite doubles as
  // strings.
  function num(v) {
    if (typeof v === "number") return v;
    if (v === undefined || v === null || v === "") return NaN;
    return Number(v);
  }
  function colour(i) { return PALETTE[i % PALETTE.length]; }

  function axis(title) {
    return {type: "linear", title: {display: true, text: title}};
  }
  function options(xTitle, yTitle) {
    return {
      animation: false, responsive: true, maintainAspectRatio: false,
      parsing: false, normalized: true,
      interaction: {mode: "nearest", intersect: false},
      plugins: {legend: {position: "bottom", labels: {boxWidth: 14}}},
      scales: {x: axis(xTitle), y: axis(yTitle)}
    };
  }

  const charts = {};
  function chart(id, type, datasets, xTitle, yTitle, why) {
    const canvas = document.getElementById(id);
    if (!canvas) return;
    const note = document.getElementById(id + "-note");
    const points = datasets.reduce(function (n, d) { return n + d.data.length; }, 0);
    if (note) note.textContent = points === 0 ? "(No data: " + why + ")" : "";
    if (charts[id]) {
      charts[id].data.datasets = datasets;
      charts[id].update("none");
      return;
    }
    charts[id] = new Chart(canvas, {type: type, data: {datasets: datasets},
                                    options: options(xTitle, yTitle)});
  }

  function line(label, data, c, dash, extra) {
    const d = {label: label, data: data, borderColor: c, backgroundColor: c,
               borderDash: dash, borderWidth: 1.5, pointRadius: 0, fill: false};
    return Object.assign(d, extra || {});
  }

  function islandsOf(run) {
    const by = new Map();
    for (const g of run.history) {
      const i = num(g.island);
      if (!by.has(i)) by.set(i, []);
      by.get(i).push(g);
    }
    for (const rows of by.values()) {
      rows.sort(function (a, b) { return num(a.generation) - num(b.generation); });
    }
    return by;
  }

  // Evaluations per second, from generation completion times: evaluations
  // completed in each window of wall time, divided by the window's length.
  function rate(run) {
    const done = run.history.filter(function (g) { return num(g.completedUnixMs) > 0; })
      .map(function (g) { return [num(g.completedUnixMs), num(g.evaluations)]; })
      .sort(function (a, b) { return a[0] - b[0]; });
    if (done.length === 0) return [];
    const t0 = Math.min(num(run.run.run.createdUnixMs) || done[0][0], done[0][0]);
    const span = done[done.length - 1][0] - t0;
    const window = Math.max(span / 40, 50);
    const out = [];
    let last = t0, acc = 0;
    for (const [t, n] of done) {
      acc += n;
      if (t - last >= window) {
        out.push({x: (t - t0) / 1000, y: acc * 1000 / (t - last)});
        last = t; acc = 0;
      }
    }
    return out;
  }

  function draw(runs) {
    const many = runs.length > 1;
    const score = [], diversity = [], rates = [], validation = [], descent = [],
          migration = [], metrics = [];
    runs.forEach(function (run, r) {
      const id = run.run.run.id;
      const prefix = many ? "run " + id + " " : "";
      const dash = many ? [[], [8, 3], [2, 2], [12, 3, 2, 3]][r % 4] : [];
      const islands = islandsOf(run);
      for (const [i, rows] of islands) {
        const c = colour(many ? r : i);
        const pts = function (f) {
          return rows.map(function (g) { return {x: num(g.generation), y: num(f(g))}; });
        };
        score.push(line(prefix + "island " + i + " best", pts(function (g) { return g.best; }), c, []));
        score.push(line(prefix + "island " + i + " mean", pts(function (g) { return g.mean; }), c, [6, 3]));
        score.push(line(prefix + "island " + i + " worst", pts(function (g) { return g.worst; }), c, [1, 3]));
        diversity.push(line(prefix + "island " + i, pts(function (g) { return g.diversity; }), c, dash));
        const names = new Set();
        for (const g of rows) for (const n of Object.keys(g.metricMeans || {})) names.add(n);
        let m = 0;
        for (const n of Array.from(names).sort()) {
          const withIt = rows.filter(function (g) { return g.metricMeans && n in g.metricMeans; });
          metrics.push(line(prefix + "island " + i + " " + n, withIt.map(function (g) {
            return {x: num(g.generation), y: num(g.metricMeans[n])}; }),
            colour(many ? r : i), [[], [6, 3], [1, 3], [12, 3, 2, 3]][m++ % 4]));
        }
        const valid = rows.filter(function (g) { return g.validationScore !== undefined && g.validationScore !== null; });
        if (valid.length > 0) {
          validation.push(line(prefix + "island " + i + " training", valid.map(function (g) {
            return {x: num(g.generation), y: num(g.best)}; }), c, [], {pointRadius: 2}));
          validation.push(line(prefix + "island " + i + " held-out", valid.map(function (g) {
            return {x: num(g.generation), y: num(g.validationScore)}; }), c, [6, 3], {pointRadius: 2}));
        }
      }
      rates.push(line(prefix + "evaluations per second", rate(run), colour(r), dash, {pointRadius: 2}));
      const a = run.attribution;
      if (a) {
        const byOrigin = {};
        const add = function (node, gain) {
          const o = node.origin;
          if (!byOrigin[o]) byOrigin[o] = [];
          byOrigin[o].push({x: num(node.key.generation), y: num(node.score),
                            island: num(node.key.island), gain: gain});
        };
        add(a.founder, 0);
        for (const s of a.improvements) add(s.child, num(s.gain));
        for (const o of Object.keys(byOrigin)) {
          descent.push({label: prefix + o.toLowerCase(), data: byOrigin[o], showLine: false,
                        pointRadius: 4, borderColor: ORIGIN_COLOUR[o] || "#000000",
                        backgroundColor: ORIGIN_COLOUR[o] || "#000000"});
        }
      }
      // Every migration event: one series per (source, destination) pair.
      const pairs = new Map();
      for (const g of run.history) {
        for (const from of Object.keys(g.migrantsFrom || {}).sort()) {
          const key = from + " to " + num(g.island);
          if (!pairs.has(key)) pairs.set(key, []);
          pairs.get(key).push({x: num(g.generation), y: num(g.migrantsFrom[from])});
        }
      }
      let p = 0;
      for (const key of Array.from(pairs.keys()).sort()) {
        const c = colour(many ? r : p);
        migration.push({label: prefix + "island " + key, showLine: false, pointRadius: 4,
          pointStyle: ["triangle", "circle", "rect", "star"][p++ % 4],
          borderColor: c, backgroundColor: c,
          data: pairs.get(key).sort(function (u, v) { return u.x - v.x; })});
      }
    });
    chart("chart-score", "line", score, "generation (count)", "score (evaluator units)",
          "no generation is complete yet");
    chart("chart-diversity", "line", diversity, "generation (count)",
          "mean per-gene standard deviation (gene units)", "no generation is complete yet");
    chart("chart-rate", "line", rates, "wall time since the run was created (s)",
          "evaluations per second (1/s)", "no generation is complete yet");
    chart("chart-validation", "line", validation, "generation (count)", "score (evaluator units)",
          "the spec declares no held-out cases, or none is validated yet");
    chart("chart-descent", "scatter", descent, "generation (count)", "score (evaluator units)",
          "the run has no champion yet");
    chart("chart-metrics", "line", metrics, "generation (count)",
          "metric mean (the evaluator's units)",
          "the evaluator returned no named metrics");
    chart("chart-migration", "scatter", migration, "generation (count)",
          "migrants arriving (count)", "no migration happened (one island, or no epoch yet)");
    check();
  }

  // Counts the charts that hold data and those of them whose canvas has
  // painted pixels, for #script-status.
  function check() {
    let expected = 0, drawn = 0;
    for (const id of Object.keys(charts)) {
      const c = charts[id];
      const points = c.data.datasets.reduce(function (n, d) { return n + d.data.length; }, 0);
      if (points === 0) continue;
      expected++;
      c.draw();
      const canvas = c.canvas;
      const px = canvas.getContext("2d").getImageData(0, 0, canvas.width, canvas.height).data;
      let painted = false;
      for (let k = 3; k < px.length; k += 4) { if (px[k] !== 0) { painted = true; break; } }
      if (painted) drawn++;
    }
    const status = document.getElementById("script-status");
    status.dataset.expected = String(expected);
    status.dataset.drawn = String(drawn);
    status.dataset.errors = String(errors.length);
    status.textContent = drawn + " of " + expected + " charts with data drawn.";
  }
  window.skerryCharts = charts;

  // ---- The live page ----
  function token() {
    const m = /(?:^#|&)token=([^&]*)/.exec(location.hash);
    if (m) {
      sessionStorage.setItem("skerry-token", decodeURIComponent(m[1]));
      history.replaceState(null, "", location.pathname + location.search);
    }
    return sessionStorage.getItem("skerry-token") || "";
  }
  function get(path) {
    const t = token();
    const headers = t ? {Authorization: "Bearer " + t} : {};
    return fetch(path, {headers: headers, cache: "no-store"}).then(function (r) {
      if (!r.ok) {
        return r.text().then(function (body) {
          throw new Error(path + ": HTTP " + r.status + ": " + body.trim());
        });
      }
      return r.json();
    });
  }
  function cells(tag, values) {
    const tr = document.createElement("tr");
    for (const v of values) {
      const td = document.createElement(tag);
      td.textContent = v === undefined || v === null ? "" : String(v);
      tr.appendChild(td);
    }
    return tr;
  }
  function table(id, head, rows) {
    const t = document.getElementById(id);
    t.replaceChildren(cells("th", head));
    for (const r of rows) t.appendChild(r);
  }
  let chosen = Number(new URLSearchParams(location.search).get("run")) || 0;
  let updates = 0;
  function refresh() {
    Promise.all([get("api/fleet"), get("api/runs")]).then(function (both) {
      const fleet = both[0], runs = both[1].runs || [];
      document.getElementById("live-storage").textContent = fleet.storage;
      document.getElementById("live-workers").textContent = fleet.workersSeen;
      document.getElementById("live-queued").textContent = fleet.queued;
      document.getElementById("live-leased").textContent = fleet.leased;
      document.getElementById("live-dbsize").textContent = fleet.databaseBytes;
      table("workers", ["worker", "name", "host", "threads", "evaluators", "version",
                        "last seen (UTC)", "tasks in flight", "evaluations per second",
                        "sandbox"],
            ((fleet.list || {}).workers || []).map(function (w) {
              const seen = num(w.lastSeenUnixMs);
              return cells("td", [w.id, w.name, w.host, w.threads,
                                  (w.evaluators || []).join(", "), w.version,
                                  seen > 0 ? new Date(seen).toISOString() : "",
                                  w.tasksInFlight, num(w.evaluationsPerSecond).toFixed(1),
                                  w.sandbox]); }));
      table("runs", ["run", "name", "owner", "state", "evaluations", "best"],
            runs.map(function (s) {
              const tr = cells("td", [s.id, s.name, s.owner, s.state, s.evaluations,
                                      s.hasBest ? num(s.bestScore) : ""]);
              const a = document.createElement("a");
              a.href = "?run=" + s.id;
              a.textContent = s.id;
              tr.firstChild.replaceChildren(a);
              return tr; }));
      if (!chosen && runs.length > 0) chosen = num(runs[runs.length - 1].id);
      if (!chosen) return null;
      return get("api/report?run=" + chosen);
    }).then(function (report) {
      if (report) {
        const s = report.run.run;
        document.getElementById("live-title").textContent = "Run " + s.id + ": " + s.name;
        table("live-run", ["run", "state", "evaluations", "best score", "champion",
                           "digest (SHA-256)"],
              [cells("td", [s.id, s.state, s.evaluations, s.hasBest ? num(s.bestScore) : "",
                            s.championId, report.digest ? report.digest.sha256 : ""])]);
        const tr = document.getElementById("live-run").rows[1];
        tr.id = "live-numbers";
        tr.dataset.evaluations = String(s.evaluations);
        tr.dataset.best = s.hasBest ? String(num(s.bestScore)) : "";
        tr.dataset.state = s.state;
        table("live-islands", ["island", "generation", "evaluated", "population",
                               "best", "mean", "diversity"],
              (s.islands || []).map(function (i) {
                return cells("td", [i.island, i.generation, i.evaluated, i.population,
                                    i.hasStats ? num(i.best) : "", i.hasStats ? num(i.mean) : "",
                                    i.hasStats ? num(i.diversity) : ""]); }));
        draw([report]);
      }
      updates++;
      document.body.dataset.updates = String(updates);
      document.getElementById("live-auth").textContent = "";
    }).catch(function (e) {
      document.getElementById("live-auth").textContent = String(e.message);
      document.body.dataset.refused = "1";
      fail(e.message);
    });
  }

  function start() {
    try {
      const mode = document.querySelector("meta[name=skerry-mode]").content;
      if (typeof Chart === "undefined") throw new Error("Chart.js did not load");
      if (mode === "live") {
        refresh();
        setInterval(refresh, 2000);
      } else {
        draw(JSON.parse(document.getElementById("skerry-data").textContent));
      }
    } catch (e) {
      fail(e && e.stack ? e.stack : e);
      check();
    }
  }
  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
)JS";
}

}  // namespace skerry::http
