#include "server/http/report_page.h"

#include <fstream>
#include <map>
#include <sstream>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_replace.h"
#include "absl/time/time.h"
#include "google/protobuf/text_format.h"
#include "google/protobuf/util/json_util.h"

namespace skerry::http {
namespace {

using skerry::v1::GenerationStats;

// Ten significant digits: enough to tell scores apart on screen; the JSON
// beside the tables keeps every bit.
std::string Num(double v) { return absl::StrFormat("%.10g", v); }

std::string Time(int64_t unix_ms) {
  if (unix_ms <= 0) return "";
  return absl::FormatTime("%Y-%m-%d %H:%M:%S", absl::FromUnixMillis(unix_ms),
                          absl::UTCTimeZone());
}

absl::StatusOr<std::string> Json(const google::protobuf::Message& m) {
  google::protobuf::util::JsonPrintOptions options;
  options.always_print_primitive_fields = true;
  std::string out;
  auto s = google::protobuf::util::MessageToJsonString(m, &out, options);
  if (!s.ok()) {
    return absl::InternalError(absl::StrCat("cannot encode ", m.GetTypeName(),
                                            " as JSON: ", s.ToString()));
  }
  return out;
}

// Styles: system fonts only (nothing to fetch). Colours of the data come from
// the script's palette; these are the page's greys.
constexpr char kStyle[] = R"(
body{font-family:system-ui,sans-serif;margin:1.5em auto;max-width:1100px;
 padding:0 1em;color:#1a1a1a;background:#fff}
h1{font-size:1.5em}h2{font-size:1.2em;margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0}
td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}
th{background:#f2f2f2}td.t,th.t{text-align:left}
figure{margin:1em 0}figcaption{font-size:.9em;color:#444}
.chart{position:relative;height:320px}
pre{background:#f7f7f7;padding:.6em;overflow:auto;font-size:.85em}
.note{color:#444;font-size:.9em}.bad{color:#b00}
)";

// One <figure> per chart; the script fills the canvases it finds.
constexpr const char* kCharts[][3] = {
    {"chart-score", "Best, mean and worst score per generation",
     "x: generation (count); y: score (evaluator units). One colour per "
     "island; solid best, dashed mean, dotted worst."},
    {"chart-diversity", "Diversity per generation",
     "x: generation (count); y: mean per-gene standard deviation (gene "
     "units)."},
    {"chart-rate", "Evaluations per second over wall time",
     "x: wall time since the run was created (s); y: evaluations per second "
     "(1/s), from generation completion times."},
    {"chart-validation", "Held-out validation beside training score",
     "x: generation (count); y: score (evaluator units) of each generation's "
     "champion on its training cases and on the held-out cases."},
    {"chart-descent", "The champion's line of descent: improvement steps",
     "x: generation (count); y: score (evaluator units) of each genome on the "
     "line that improved on its parent, coloured by the operator that made "
     "it."},
    {"chart-metrics", "Evaluator metrics: mean per generation",
     "x: generation (count); y: the metric's mean over the generation's "
     "genomes, in the units the evaluator gives it. One line per island and "
     "metric."},
    {"chart-migration",
     "Migration events: migrants per generation and island "
     "pair",
     "x: generation (count); y: migrants (count) that arrived at an island "
     "from another in that generation, every migration of the run. One "
     "series per pair, source to destination."},
};

std::string ChartFigures() {
  std::string out = "<h2>Charts</h2>\n";
  for (const auto& c : kCharts) {
    absl::StrAppend(&out, "<figure><div class=\"chart\"><canvas id=\"", c[0],
                    "\" role=\"img\" aria-label=\"", c[1],
                    "\"></canvas></div><figcaption><b>", c[1], ".</b> ", c[2],
                    " <span class=\"note\" id=\"", c[0],
                    "-note\"></span></figcaption></figure>\n");
  }
  return out;
}

std::string Head(absl::string_view title, absl::string_view mode) {
  return absl::StrCat(
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
      "<meta name=\"viewport\" content=\"width=device-width\">\n"
      "<meta name=\"skerry-mode\" content=\"",
      mode, "\">\n<title>", HtmlEscape(title), "</title>\n<style>", kStyle,
      "</style>\n</head>\n<body>\n");
}

std::string Scripts(absl::string_view chart_library) {
  return absl::StrCat("<script>", chart_library, "</script>\n<script>",
                      ReportScript(), "</script>\n");
}

std::string StatusLine() {
  return "<p class=\"note\" id=\"script-status\">Charts need scripts; every "
         "number is also in the tables below.</p>\n"
         "<pre class=\"bad\" id=\"script-errors\" hidden></pre>\n";
}

std::string SummaryTable(const std::vector<RunReportData>& runs) {
  std::string out =
      "<h2>Runs</h2>\n<table id=\"summary\"><tr><th>run</th><th "
      "class=\"t\">name</th><th class=\"t\">owner</th><th "
      "class=\"t\">state</th><th>seed</th><th>evaluations</th><th>best "
      "score</th><th>champion</th><th>islands</th><th "
      "class=\"t\">created (UTC)</th><th class=\"t\">digest "
      "(SHA-256)</th></tr>\n";
  for (const RunReportData& r : runs) {
    const skerry::v1::RunSummary& s = r.run.run();
    absl::StrAppend(&out, "<tr data-run=\"", s.id(), "\"><td>", s.id(),
                    "</td><td class=\"t\">", HtmlEscape(s.name()),
                    "</td><td class=\"t\">", HtmlEscape(s.owner()),
                    "</td><td class=\"t\">",
                    skerry::v1::RunState_Name(s.state()), "</td><td>", s.seed(),
                    "</td><td>", s.evaluations(), "</td><td>",
                    s.has_best() ? Num(s.best_score()) : "", "</td><td>",
                    s.champion_id() != 0 ? absl::StrCat(s.champion_id()) : "",
                    "</td><td>", s.islands_size(), "</td><td class=\"t\">",
                    Time(s.created_unix_ms()), "</td><td class=\"t\"><code>",
                    r.digest ? absl::StrCat(r.digest->sha256(), " (",
                                            r.digest->genomes(), " genomes)")
                             : "",
                    "</code></td></tr>\n");
  }
  return out + "</table>\n";
}

// "name=value; ..." by name.
std::string MetricCell(const GenerationStats& g) {
  const std::map<std::string, double> sorted(g.metric_means().begin(),
                                             g.metric_means().end());
  std::string out;
  for (const auto& [name, value] : sorted) {
    absl::StrAppend(&out, out.empty() ? "" : "; ", HtmlEscape(name), "=",
                    Num(value));
  }
  return out;
}

// "0: 2; 3: 1": migrants this island's generation received, by source.
std::string MigrantCell(const GenerationStats& g) {
  std::map<uint32_t, uint32_t> sorted(g.migrants_from().begin(),
                                      g.migrants_from().end());
  std::string out;
  for (const auto& [from, count] : sorted) {
    absl::StrAppend(&out, out.empty() ? "" : "; ", from, ": ", count);
  }
  return out;
}

std::string HistoryTable(const RunReportData& r) {
  const uint64_t id = r.run.run().id();
  std::string out = absl::StrCat(
      "<details><summary>Run ", id, ": every generation of every island (",
      r.history.size(),
      " rows)</summary>\n<table class=\"history\" data-run=\"", id,
      "\"><tr><th>island</th><th>generation</th><th>best</th><th>mean</"
      "th><th>worst</th><th>diversity</th><th>evaluations</th><th>failed</"
      "th><th>validation</th><th class=\"t\">completed (UTC)</th><th "
      "class=\"t\">evaluator metrics (means)</th><th class=\"t\">migrants "
      "from (island: count)</th></tr>\n");
  for (const GenerationStats& g : r.history) {
    absl::StrAppend(
        &out, "<tr data-island=\"", g.island(), "\" data-generation=\"",
        g.generation(), "\"><td>", g.island(), "</td><td>", g.generation(),
        "</td><td>", Num(g.best()), "</td><td>", Num(g.mean()), "</td><td>",
        Num(g.worst()), "</td><td>", Num(g.diversity()), "</td><td>",
        g.evaluations(), "</td><td>", g.failed(), "</td><td>",
        g.has_validation_score() ? Num(g.validation_score()) : "",
        "</td><td class=\"t\">", Time(g.completed_unix_ms()),
        "</td><td class=\"t\">", MetricCell(g), "</td><td class=\"t\">",
        MigrantCell(g), "</td></tr>\n");
  }
  return out + "</table></details>\n";
}

std::string NodeKey(const skerry::v1::LineageNode& n) {
  return absl::StrCat(n.key().run_id(), "/", n.key().island(), "/",
                      n.key().generation(), "/", n.key().slot());
}

std::string DescentTables(const RunReportData& r) {
  const uint64_t id = r.run.run().id();
  if (!r.attribution) {
    return absl::StrCat("<p class=\"note\">Run ", id,
                        ": no champion yet, so no line of descent.</p>\n");
  }
  const skerry::v1::AttributionResponse& a = *r.attribution;
  std::string out = absl::StrCat(
      "<p>Run ", id, ": champion #", a.genome().id(), " (", NodeKey(a.genome()),
      ", score ", Num(a.genome().score()), ") descends from founder #",
      a.founder().id(), " (", NodeKey(a.founder()), ", ",
      skerry::v1::Origin_Name(a.founder().origin()), ", score ",
      Num(a.founder().score()), ") over ", a.steps(), " steps; total gain ",
      Num(a.total_gain()), ".</p>\n",
      "<table class=\"improvements\" data-run=\"", id,
      "\"><tr><th>generation</th><th>island</th><th class=\"t\">origin</th>"
      "<th class=\"t\">genome</th><th>score</th><th>gain</th></tr>\n");
  for (const skerry::v1::DescentStep& s : a.improvements()) {
    absl::StrAppend(&out, "<tr><td>", s.child().key().generation(), "</td><td>",
                    s.child().key().island(), "</td><td class=\"t\">",
                    skerry::v1::Origin_Name(s.child().origin()),
                    "</td><td class=\"t\">#", s.child().id(), " ",
                    NodeKey(s.child()), "</td><td>", Num(s.child().score()),
                    "</td><td>", Num(s.gain()), "</td></tr>\n");
  }
  absl::StrAppend(&out,
                  "</table>\n<table class=\"origins\"><tr><th "
                  "class=\"t\">origin</th><th>steps</th><th>improvements</"
                  "th><th>gain</th><th>loss</th></tr>\n");
  for (const skerry::v1::OriginShare& o : a.origins()) {
    absl::StrAppend(&out, "<tr><td class=\"t\">",
                    skerry::v1::Origin_Name(o.origin()), "</td><td>", o.steps(),
                    "</td><td>", o.improvements(), "</td><td>", Num(o.gain()),
                    "</td><td>", Num(o.loss()), "</td></tr>\n");
  }
  absl::StrAppend(&out,
                  "</table>\n<table class=\"crossings\"><tr><th>generation</"
                  "th><th>from island</th><th>to island</th><th "
                  "class=\"t\">origin</th></tr>\n");
  for (const skerry::v1::IslandCrossing& c : a.crossings()) {
    absl::StrAppend(&out, "<tr><td>", c.generation(), "</td><td>",
                    c.from_island(), "</td><td>", c.to_island(),
                    "</td><td class=\"t\">",
                    skerry::v1::Origin_Name(c.origin()), "</td></tr>\n");
  }
  return out + "</table>\n";
}

std::string SpecBlock(const RunReportData& r) {
  std::string text;
  google::protobuf::TextFormat::PrintToString(r.run.spec(), &text);
  std::string out = absl::StrCat("<h3>Run ", r.run.run().id(), "</h3>\n");
  if (!r.run.run().message().empty()) {
    absl::StrAppend(&out, "<p>", HtmlEscape(r.run.run().message()), "</p>\n");
  }
  if (r.run.has_champion_validation()) {
    const skerry::v1::Validation& v = r.run.champion_validation();
    absl::StrAppend(&out, "<p>Champion's held-out validation: ",
                    skerry::v1::ValidationState_Name(v.state()), ", score ",
                    Num(v.score()), " over ", v.cases(),
                    " cases (training score ", Num(v.training_score()),
                    ").</p>\n");
  }
  absl::StrAppend(&out, "<pre>", HtmlEscape(text), "</pre>\n");
  return out;
}

}  // namespace

std::string HtmlEscape(absl::string_view text) {
  return absl::StrReplaceAll(text, {{"&", "&amp;"},
                                    {"<", "&lt;"},
                                    {">", "&gt;"},
                                    {"\"", "&quot;"},
                                    {"'", "&#39;"}});
}

absl::StatusOr<std::string> LoadChartLibrary(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::NotFoundError(
        absl::StrCat("cannot read the charting library ", path,
                     " (install Debian's libjs-chart.js, or name the file with "
                     "--chart-library)"));
  }
  std::stringstream text;
  text << in.rdbuf();
  std::string library = text.str();
  if (library.find("Chart") == std::string::npos) {
    return absl::InvalidArgumentError(
        absl::StrCat(path, ": does not look like Chart.js"));
  }
  // The library is inlined in a <script> element, which this would end.
  if (absl::StrContains(library, "</script") ||
      absl::StrContains(library, "</SCRIPT")) {
    return absl::InvalidArgumentError(absl::StrCat(
        path, ": contains \"</script\" and cannot be inlined in a page"));
  }
  return library;
}

absl::StatusOr<std::string> ReportJson(const std::vector<RunReportData>& runs) {
  std::string out = "[";
  for (size_t i = 0; i < runs.size(); ++i) {
    const RunReportData& r = runs[i];
    absl::StrAppend(&out, i == 0 ? "" : ",", "{\"run\":");
    absl::StatusOr<std::string> run = Json(r.run);
    if (!run.ok()) return run.status();
    absl::StrAppend(&out, *run, ",\"history\":[");
    for (size_t j = 0; j < r.history.size(); ++j) {
      absl::StatusOr<std::string> g = Json(r.history[j]);
      if (!g.ok()) return g.status();
      absl::StrAppend(&out, j == 0 ? "" : ",", *g);
    }
    absl::StrAppend(&out, "],\"digest\":");
    if (r.digest) {
      absl::StatusOr<std::string> d = Json(*r.digest);
      if (!d.ok()) return d.status();
      absl::StrAppend(&out, *d);
    } else {
      absl::StrAppend(&out, "null");
    }
    absl::StrAppend(&out, ",\"attribution\":");
    if (r.attribution) {
      absl::StatusOr<std::string> a = Json(*r.attribution);
      if (!a.ok()) return a.status();
      absl::StrAppend(&out, *a);
    } else {
      absl::StrAppend(&out, "null");
    }
    absl::StrAppend(&out, "}");
  }
  out += "]";
  // '<' only occurs inside JSON strings, where \u003c means the same; this
  // keeps "</script>" in a run's name or spec from ending the element.
  return absl::StrReplaceAll(out, {{"<", "\\u003c"}});
}

absl::StatusOr<std::string> RenderReport(const std::vector<RunReportData>& runs,
                                         absl::string_view chart_library,
                                         absl::string_view generated) {
  absl::StatusOr<std::string> json = ReportJson(runs);
  if (!json.ok()) return json.status();
  std::string ids;
  for (const RunReportData& r : runs) {
    absl::StrAppend(&ids, ids.empty() ? "" : ", ", r.run.run().id());
  }
  std::string title =
      absl::StrCat("Skerry report: run", runs.size() > 1 ? "s " : " ", ids);
  std::string out = Head(title, "report");
  absl::StrAppend(&out, "<h1>", HtmlEscape(title),
                  "</h1>\n<p class=\"note\">Written ", HtmlEscape(generated),
                  " by <code>skerry report</code>. Charts: Chart.js "
                  "(inlined); colours: the Okabe-Ito palette for colour-blind "
                  "readers.</p>\n",
                  StatusLine(), SummaryTable(runs), ChartFigures(),
                  "<h2>Where the champion came from</h2>\n");
  for (const RunReportData& r : runs) out += DescentTables(r);
  out += "<h2>Generations</h2>\n";
  for (const RunReportData& r : runs) out += HistoryTable(r);
  out += "<h2>Specs</h2>\n";
  for (const RunReportData& r : runs) out += SpecBlock(r);
  absl::StrAppend(&out, "<script type=\"application/json\" id=\"skerry-data\">",
                  *json, "</script>\n", Scripts(chart_library),
                  "</body></html>\n");
  return out;
}

std::string RenderLivePage(absl::string_view chart_library) {
  std::string out = Head("Skerry: live", "live");
  absl::StrAppend(
      &out,
      "<h1>Skerry: live</h1>\n<noscript><p>This page needs scripts. "
      "<code>skerry report RUN -o FILE.html</code> writes a page with every "
      "number in tables.</p></noscript>\n",
      StatusLine(),
      "<p id=\"live-auth\" class=\"note\"></p>\n"
      "<h2>Coordinator</h2>\n<table id=\"fleet\"><tr><th class=\"t\">"
      "storage</th><th>workers seen (last minute)</th><th>tasks "
      "queued</th><th>tasks leased</th><th>database (bytes)</th></tr>"
      "<tr><td class=\"t\" id=\"live-storage\"></td><td "
      "id=\"live-workers\"></td><td id=\"live-queued\"></td><td "
      "id=\"live-leased\"></td><td id=\"live-dbsize\"></td></tr></table>\n"
      "<h2>Workers</h2>\n<table id=\"workers\"></table>\n"
      "<h2>Runs</h2>\n<p class=\"note\">Choose a run: its charts follow it "
      "live.</p>\n<table id=\"runs\"></table>\n",
      "<h2 id=\"live-title\">Run</h2>\n<table id=\"live-run\"></table>\n",
      "<table id=\"live-islands\"></table>\n", ChartFigures(),
      Scripts(chart_library), "</body></html>\n");
  return out;
}

}  // namespace skerry::http
