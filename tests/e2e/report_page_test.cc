// The report and the live page in a real headless Chromium (Debian's
// `chromium`, driven over the DevTools protocol by
// tests/browser/cdp_driver.py): the real coordinator on loopback with a SQLite
// file, a real worker, the skerry CLI. Checks: no script errors, every chart
// with data drawn (painted pixels on its canvas), nothing fetched from the
// network by the report, the numbers on the page equal to those in the
// database, the live page following a running run, access refused without a
// token, and /metrics accepted by `promtool check metrics` (Debian's prometheus
// package).

#include <cmath>
#include <cstdlib>
#include <map>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "common/genes.h"
#include "gmock/gmock.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/access.grpc.pb.h"
#include "tests/e2e/access_fixture.h"
#include "tests/support/db_check.h"
#include "tests/support/http_get.h"
#include "tests/support/process.h"
#include "tests/support/specs.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::RunCommand;

// Two islands with migration and held-out validation, so that every chart of
// the report has data (the same cart-pole spec as held_out_validation_test).
const std::string kValidatedSpec = testing::CartPoleValidatedSpec(200, 6);

const std::string kSphereSpec = testing::BuiltinIslandSpec(
    "sphere-three", 11, 4, "sphere", "population_size: 16 immigrants: 1",
    "count: 3 interval: 3 migrants: 1", 12);

// Runs until stopped: the live page must see it advance.
const std::string kLongSpec = testing::BuiltinIslandSpec(
    "long-rastrigin", 5, 10, "rastrigin", "population_size: 40",
    "count: 2 interval: 10 migrants: 1", 1000000);

// The browser's answer (cdp_driver.py prints one JSON object).
struct Page {
  google::protobuf::Struct json;
  const google::protobuf::Value& Field(const std::string& name) const {
    static const google::protobuf::Value kNone;
    auto it = json.fields().find(name);
    return it == json.fields().end() ? kNone : it->second;
  }
  bool ready() const { return Field("ready").bool_value(); }
  const google::protobuf::Struct& value() const {
    return Field("value").struct_value();
  }
  std::string Value(const std::string& name) const {
    auto it = value().fields().find(name);
    return it == value().fields().end() ? "" : it->second.string_value();
  }
  std::vector<std::string> List(const std::string& name) const {
    std::vector<std::string> out;
    for (const auto& v : Field(name).list_value().values()) {
      out.push_back(v.string_value());
    }
    return out;
  }
};

struct BrowseArgs {
  std::string url;
  std::string wait;
  std::string eval = "null";
  std::string changes;
  std::string screenshot;
};

Page Browse(const BrowseArgs& a) {
  std::vector<std::string> argv = {"/usr/bin/python3",
                                   SKERRY_CDP_DRIVER,
                                   "--chromium",
                                   SKERRY_CHROMIUM_BIN,
                                   "--url",
                                   a.url,
                                   "--wait",
                                   a.wait,
                                   "--eval",
                                   a.eval,
                                   "--timeout",
                                   "90"};
  if (!a.changes.empty()) {
    argv.push_back("--changes");
    argv.push_back(a.changes);
  }
  if (!a.screenshot.empty()) {
    argv.push_back("--screenshot");
    argv.push_back(a.screenshot);
  }
  testing::CommandResult r = RunCommand(argv, absl::Seconds(150));
  Page page;
  EXPECT_EQ(r.exit_code, 0) << r.output;
  // The last line is the JSON answer (Chromium may log above it).
  std::vector<std::string> lines =
      absl::StrSplit(r.output, '\n', absl::SkipEmpty());
  EXPECT_FALSE(lines.empty()) << r.output;
  if (lines.empty()) return page;
  auto s =
      google::protobuf::util::JsonStringToMessage(lines.back(), &page.json);
  EXPECT_TRUE(s.ok()) << r.output;
  return page;
}

// The status line the page's script fills: charts expected, drawn, errors.
constexpr char kChartsDone[] =
    "document.getElementById('script-status').dataset.drawn !== undefined";
constexpr char kReportValues[] = R"JS(({
  expected: document.getElementById('script-status').dataset.expected,
  drawn: document.getElementById('script-status').dataset.drawn,
  history: Array.from(document.querySelectorAll('table.history[data-run="1"] tr[data-island]'))
      .map(tr => Array.from(tr.cells).slice(0, 7).map(td => td.textContent).join(' ')).join('\n'),
  summary: Array.from(document.querySelectorAll('#summary tr[data-run]'))
      .map(tr => Array.from(tr.cells).map(td => td.textContent).join('|')).join('\n'),
  migration: window.skerryCharts['chart-migration'].data.datasets.flatMap(
      d => d.data.map(p => d.label + '|' + p.x + '|' + p.y)).sort().join('\n')
}))JS";

double Number(const std::string& text) {
  double v = NAN;
  EXPECT_TRUE(absl::SimpleAtod(text, &v)) << "'" << text << "'";
  return v;
}

void ExpectClose(const std::string& page, const std::string& db) {
  const double a = Number(page), b = Number(db);
  // The page prints ten significant digits.
  EXPECT_NEAR(a, b, 1e-9 * std::max(1.0, std::fabs(b))) << page << " vs " << db;
}

using testing::HttpGet;

class ReportPageTest : public ::testing::Test {
 protected:
  void SetUp() override { db_ = dir_.File("skerry.db"); }

  void Start(const std::vector<std::string>& flags) {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_, dir_.File("coordinator.log"), flags);
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }

  std::vector<std::string> Cli(std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     coordinator_->address()};
    if (!token_.empty()) {
      argv.push_back("--token");
      argv.push_back(token_);
    }
    argv.insert(argv.end(), args.begin(), args.end());
    return argv;
  }

  void Submit(const std::string& text) {
    const std::string spec = dir_.File(absl::StrCat("run", ++runs_, ".spec"));
    ASSERT_TRUE(testing::WriteTextFile(spec, text));
    testing::CommandResult r = RunCommand(Cli({"submit", spec}));
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }

  void StartWorker(const std::string& token,
                   const std::vector<std::string>& extra = {}) {
    std::vector<std::string> argv = {SKERRY_WORKER_BIN, "--coordinator",
                                     coordinator_->address(), "--threads", "2"};
    argv.insert(argv.end(), extra.begin(), extra.end());
    if (!token.empty()) {
      argv.push_back("--token");
      argv.push_back(token);
    }
    absl::StatusOr<testing::Process> w =
        testing::Process::Start(argv, dir_.File("worker.log"));
    ASSERT_TRUE(w.ok()) << w.status();
    worker_ = std::make_unique<testing::Process>(std::move(*w));
  }

  std::string Screenshot(const std::string& name) {
    const char* dir = std::getenv("SKERRY_SCREENSHOT_DIR");
    return absl::StrCat(dir != nullptr ? dir : SKERRY_SCREENSHOT_DIR, "/",
                        name);
  }

  testing::TempDir dir_;
  std::string db_;
  std::string token_;
  int runs_ = 0;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::unique_ptr<testing::Process> worker_;
};

TEST_F(ReportPageTest, ReportDrawsEveryChartOfflineWithTheDatabaseNumbers) {
  Start({});
  Submit(kValidatedSpec);
  Submit(kSphereSpec);
  StartWorker("");
  for (const char* run : {"1", "2"}) {
    testing::CommandResult w =
        RunCommand(Cli({"watch", run}), absl::Seconds(300));
    ASSERT_EQ(w.exit_code, 0) << w.output;
  }
  // The champion validations are computed after the run ends.
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        return testing::QueryText(
                   db_,
                   "SELECT count(*) FROM validations WHERE state != 2 "
                   "AND run_id = 1") == "0";
      },
      absl::Seconds(120)));
  const std::string one = dir_.File("one.html");
  testing::CommandResult r = RunCommand(Cli({"report", "1", "-o", one}));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_THAT(r.output, HasSubstr("wrote " + one));

  Page page = Browse({"file://" + one, kChartsDone, kReportValues, "",
                      Screenshot("report.png")});
  ASSERT_TRUE(page.ready()) << page.json.DebugString();
  EXPECT_THAT(page.List("errors"), ::testing::IsEmpty());
  EXPECT_THAT(page.List("requests"), ::testing::IsEmpty());
  // Score, diversity, rate, validation, descent, crossings: the first five
  // always have data in this run; the crossings when the line migrated.
  EXPECT_GE(Number(page.Value("expected")), 5);
  EXPECT_EQ(page.Value("drawn"), page.Value("expected"));

  // Every generation of every island, as stored.
  const std::string stored = testing::QueryText(
      db_,
      "SELECT group_concat(island || ' ' || generation || ' ' || "
      "printf('%.17g', best) || ' ' || printf('%.17g', mean) || ' ' || "
      "printf('%.17g', worst) || ' ' || printf('%.17g', diversity) || ' ' || "
      "evaluations, char(10)) FROM (SELECT * FROM generation_stats WHERE "
      "run_id = 1 ORDER BY island, generation)");
  std::vector<std::string> want = absl::StrSplit(stored, '\n');
  std::vector<std::string> got =
      absl::StrSplit(page.Value("history"), '\n', absl::SkipEmpty());
  ASSERT_EQ(got.size(), want.size()) << page.Value("history");
  ASSERT_EQ(want.size(), 12u);  // 2 islands x 6 generations
  for (size_t i = 0; i < want.size(); ++i) {
    std::vector<std::string> g = absl::StrSplit(got[i], ' ');
    std::vector<std::string> w = absl::StrSplit(want[i], ' ');
    ASSERT_EQ(g.size(), 7u) << got[i];
    ASSERT_EQ(w.size(), 7u) << want[i];
    EXPECT_EQ(g[0], w[0]);
    EXPECT_EQ(g[1], w[1]);
    for (int k = 2; k < 6; ++k) ExpectClose(g[k], w[k]);
    EXPECT_EQ(g[6], w[6]);
  }
  // The summary: evaluations, best score and digest as stored.
  std::vector<std::string> summary = absl::StrSplit(page.Value("summary"), '|');
  ASSERT_EQ(summary.size(), 11u) << page.Value("summary");
  EXPECT_EQ(summary[5], testing::QueryText(
                            db_, "SELECT evaluations FROM runs WHERE id = 1"));
  ExpectClose(summary[6],
              testing::QueryText(db_,
                                 "SELECT printf('%.17g', best_score) "
                                 "FROM runs WHERE id = 1"));
  testing::CommandResult digest = RunCommand(Cli({"digest", "1"}));
  EXPECT_THAT(summary[10], HasSubstr(testing::DigestIn(digest.output)));
  // Every migration event of the run, per generation and island pair, as
  // stored: each MIGRANT genome, counted by its parent's island.
  const std::string events = testing::QueryText(
      db_,
      "SELECT group_concat(e, char(10)) FROM (SELECT 'island ' || p.island || "
      "' to ' || g.island || '|' || g.generation || '|' || count(*) AS e FROM "
      "genomes g JOIN genomes p ON p.id = g.parent_a WHERE g.run_id = 1 AND "
      "g.origin = 6 GROUP BY g.island, g.generation, p.island ORDER BY e)");
  ASSERT_FALSE(events.empty()) << "the run had no migration";
  EXPECT_EQ(page.Value("migration"), events);

  // Two runs overlay on the same charts.
  const std::string two = dir_.File("two.html");
  r = RunCommand(Cli({"report", "1", "2", "-o", two}));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  page = Browse({"file://" + two, kChartsDone, kReportValues, "", ""});
  ASSERT_TRUE(page.ready());
  EXPECT_THAT(page.List("errors"), ::testing::IsEmpty());
  EXPECT_EQ(page.Value("drawn"), page.Value("expected"));
  EXPECT_EQ(
      std::vector<std::string>(absl::StrSplit(page.Value("summary"), '\n'))
          .size(),
      2u);
}

TEST_F(ReportPageTest, ReportOfAnUnknownRunFailsAndWritesNothing) {
  Start({});
  const std::string out = dir_.File("none.html");
  testing::CommandResult r = RunCommand(Cli({"report", "9", "-o", out}));
  EXPECT_EQ(r.exit_code, 1) << r.output;
  EXPECT_THAT(r.output, HasSubstr("run 9"));
  EXPECT_NE(access(out.c_str(), F_OK), 0);
}

TEST_F(ReportPageTest, LivePageFollowsARunningRunAndRefusesWithoutAToken) {
  absl::StatusOr<std::string> admin =
      testing::InitAdmin(SKERRY_COORDINATOR_BIN, db_, "ada");
  ASSERT_TRUE(admin.ok()) << admin.status();
  token_ = *admin;
  Start({"--http", "127.0.0.1:0"});
  int http_port = 0;
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        const std::string log = coordinator_->process.Log();
        const size_t at = log.find("web page on http port ");
        return at != std::string::npos &&
               absl::SimpleAtoi(
                   log.substr(at + 22, log.find('\n', at) - at - 22),
                   &http_port);
      },
      absl::Seconds(10)));
  auto access = skerry::v1::AccessService::NewStub(grpc::CreateChannel(
      coordinator_->address(), grpc::InsecureChannelCredentials()));
  auto viewer =
      testing::CreateToken(*access, token_, "vic", skerry::v1::ROLE_VIEWER);
  auto worker =
      testing::CreateToken(*access, token_, "wendy", skerry::v1::ROLE_WORKER);
  ASSERT_TRUE(viewer.ok() && worker.ok());
  Submit(kLongSpec);
  StartWorker(worker->secret());

  // No token, or a worker's: refused.
  EXPECT_EQ(HttpGet(http_port, "/metrics", "").first, 401);
  EXPECT_EQ(HttpGet(http_port, "/api/runs", "").first, 401);
  EXPECT_EQ(HttpGet(http_port, "/api/report?run=1", "").first, 401);
  EXPECT_EQ(HttpGet(http_port, "/metrics", worker->secret()).first, 403);
  const std::string base = absl::StrCat("http://127.0.0.1:", http_port, "/");
  Page refused = Browse(
      {base + "?run=1", "document.body.dataset.refused === '1'",
       "({auth: document.getElementById('live-auth').textContent})", "", ""});
  ASSERT_TRUE(refused.ready()) << refused.json.DebugString();
  EXPECT_THAT(refused.Value("auth"), HasSubstr("401"));

  // A viewer's token: the page follows the run as it advances.
  constexpr char kEvaluations[] =
      "document.getElementById('live-numbers').dataset.evaluations";
  Page live = Browse(
      {base + "?run=1#token=" + viewer->secret(),
       "document.getElementById('live-numbers') && "
       "document.getElementById('script-status').dataset.drawn",
       "({expected: document.getElementById('script-status').dataset.expected,"
       " drawn: document.getElementById('script-status').dataset.drawn})",
       kEvaluations, Screenshot("live.png")});
  ASSERT_TRUE(live.ready()) << live.json.DebugString();
  EXPECT_TRUE(live.Field("changed").bool_value()) << live.json.DebugString();
  EXPECT_THAT(live.List("errors"), ::testing::IsEmpty());
  EXPECT_GE(Number(live.Value("expected")), 4);
  EXPECT_EQ(live.Value("drawn"), live.Value("expected"));

  // Metrics: a viewer may read them, and promtool accepts them.
  auto [code, metrics] = HttpGet(http_port, "/metrics", viewer->secret());
  ASSERT_EQ(code, 200) << metrics;
  EXPECT_THAT(metrics, HasSubstr("skerry_run_evaluations{run=\"1\""));
  EXPECT_THAT(metrics, HasSubstr("skerry_workers_connected 1"));
  const std::string file = dir_.File("metrics.txt");
  ASSERT_TRUE(testing::WriteTextFile(file, metrics));
  testing::CommandResult check = RunCommand(
      {"/bin/sh", "-c",
       absl::StrCat(SKERRY_PROMTOOL_BIN, " check metrics < ", file)});
  EXPECT_EQ(check.exit_code, 0) << check.output;

  // `skerry workers` with a viewer's token: the worker, busy.
  testing::CommandResult workers =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", coordinator_->address(),
                  "--token", viewer->secret(), "workers"});
  ASSERT_EQ(workers.exit_code, 0) << workers.output;
  EXPECT_THAT(workers.output, HasSubstr("IN FLIGHT"));
  EXPECT_THAT(workers.output, HasSubstr("rastrigin"));
  std::vector<std::string> lines =
      absl::StrSplit(workers.output, '\n', absl::SkipEmpty());
  EXPECT_EQ(lines.size(), 2u) << workers.output;  // header and one worker
  EXPECT_EQ(RunCommand({SKERRY_CLI_BIN, "--coordinator",
                        coordinator_->address(), "workers"})
                .exit_code,
            1);  // no token

  // Stopped, the page shows what the database holds.
  ASSERT_EQ(RunCommand(Cli({"stop", "1"})).exit_code, 0);
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        return testing::QueryText(db_, "SELECT state FROM runs WHERE id = 1") ==
               "5";
      },
      absl::Seconds(30)));
  Page after = Browse(
      {base + "?run=1#token=" + viewer->secret(),
       "document.getElementById('live-numbers') && "
       "document.getElementById('live-numbers').dataset.state === 'STOPPED'",
       "({evaluations: "
       "document.getElementById('live-numbers').dataset.evaluations,"
       " best: document.getElementById('live-numbers').dataset.best})",
       "", ""});
  ASSERT_TRUE(after.ready()) << after.json.DebugString();
  EXPECT_EQ(
      after.Value("evaluations"),
      testing::QueryText(db_, "SELECT evaluations FROM runs WHERE id = 1"));
  ExpectClose(after.Value("best"),
              testing::QueryText(db_,
                                 "SELECT printf('%.17g', best_score) FROM "
                                 "runs WHERE id = 1"));
}

TEST_F(ReportPageTest, WebPortServesHttpsWithTheGrpcCertificate) {
  // A throwaway self-signed certificate for 127.0.0.1 (P-256: quick to make,
  // common practice for test PKI).
  testing::CommandResult made = RunCommand(
      {SKERRY_OPENSSL_BIN, "req", "-x509", "-newkey", "ec", "-pkeyopt",
       "ec_paramgen_curve:prime256v1", "-nodes", "-days", "2", "-subj",
       "/CN=skerry web test", "-addext", "subjectAltName=IP:127.0.0.1",
       "-keyout", dir_.File("server.key"), "-out", dir_.File("server.pem")});
  ASSERT_EQ(made.exit_code, 0) << made.output;
  Start({"--tls-cert", dir_.File("server.pem"), "--tls-key",
         dir_.File("server.key"), "--http", "127.0.0.1:0"});
  int port = 0;
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        const std::string log = coordinator_->process.Log();
        const size_t at = log.find("web page on https port ");
        return at != std::string::npos &&
               absl::SimpleAtoi(
                   log.substr(at + 23, log.find('\n', at) - at - 23), &port);
      },
      absl::Seconds(10)))
      << coordinator_->process.Log();
  // Trusting only the gRPC port's certificate, the web port verifies.
  constexpr char kFetch[] = R"PY(import ssl, sys, urllib.request
ctx = ssl.create_default_context(cafile=sys.argv[1])
with urllib.request.urlopen(sys.argv[2], context=ctx, timeout=30) as r:
    print(r.status)
    print(r.read().decode())
)PY";
  testing::CommandResult fetched =
      RunCommand({"/usr/bin/python3", "-c", kFetch, dir_.File("server.pem"),
                  absl::StrCat("https://127.0.0.1:", port, "/metrics")});
  ASSERT_EQ(fetched.exit_code, 0) << fetched.output;
  EXPECT_THAT(fetched.output, HasSubstr("200\n# HELP skerry_results_total"));
  // Plain HTTP gets no page from it.
  EXPECT_NE(HttpGet(port, "/metrics", "").first, 200);
}

// An external evaluator that returns two named metrics with each score:
// abs_sum = sum of |gene| and first = gene 0, easy to recompute from the
// stored genes.
constexpr char kMetricsScript[] = R"PY(import json, sys
for line in sys.stdin:
    r = json.loads(line)
    g = r.get("genes", [])
    print(json.dumps({"id": r["id"], "score": sum(x * x for x in g),
                      "metrics": {"abs_sum": sum(abs(x) for x in g),
                                  "first": g[0]}}), flush=True)
)PY";

TEST_F(ReportPageTest, EvaluatorMetricsAreStoredShownAndPlotted) {
  const std::string script = dir_.File("metrics.py");
  ASSERT_TRUE(testing::WriteTextFile(script, kMetricsScript));
  Start({});
  Submit(absl::StrCat(R"(
name: "with-metrics"
seed: 3
genome_length: 3
lower_bound: -2
upper_bound: 2
evaluator { external { argv: "/usr/bin/python3" argv: ")",
                      script, R"(" } }
ga { population_size: 8 elites: 1 }
islands { count: 2 interval: 2 migrants: 1 }
stop { max_generations: 5 }
)"));
  // The evaluator program lives in the test's folder: let the sandbox show
  // it.
  StartWorker("", {"--evaluator-dirs", dir_.path()});
  testing::CommandResult w =
      RunCommand(Cli({"watch", "1"}), absl::Seconds(300));
  ASSERT_EQ(w.exit_code, 0) << w.output;

  // Stored per genome: each value recomputed from the stored genes.
  std::map<int64_t, std::vector<double>> genes;
  for (const testing::StoredGenome& g : testing::ReadGenomes(db_, 1)) {
    absl::StatusOr<std::vector<double>> v = UnpackGenes(g.genes);
    ASSERT_TRUE(v.ok());
    genes[g.id] = *v;
  }
  const std::string rows = testing::QueryText(
      db_,
      "SELECT group_concat(genome_id || ' ' || name || ' ' || "
      "printf('%.17g', value), ';') FROM genome_metrics WHERE run_id = 1");
  std::vector<std::string> stored = absl::StrSplit(rows, ';');
  // Every genome evaluated (seeded, bred, immigrant) has both metrics.
  EXPECT_EQ(stored.size(),
            2 * std::stoul(testing::QueryText(
                    db_,
                    "SELECT count(*) FROM genomes WHERE run_id = 1 AND "
                    "attempts > 0 AND eval_state = 2")));
  for (const std::string& row : stored) {
    std::vector<std::string> f = absl::StrSplit(row, ' ');
    ASSERT_EQ(f.size(), 3u) << row;
    const std::vector<double>& x = genes[std::stoll(f[0])];
    ASSERT_EQ(x.size(), 3u);
    const double want =
        f[1] == "first" ? x[0]
                        : std::fabs(x[0]) + std::fabs(x[1]) + std::fabs(x[2]);
    EXPECT_DOUBLE_EQ(Number(f[2]), want) << row;
  }

  // Shown by champion and history.
  testing::CommandResult champion = RunCommand(Cli({"champion", "1"}));
  EXPECT_THAT(champion.output, HasSubstr("metric      abs_sum  "));
  EXPECT_THAT(champion.output, HasSubstr("metric      first  "));
  testing::CommandResult history = RunCommand(Cli({"history", "1"}));
  EXPECT_THAT(history.output,
              HasSubstr("evaluator metrics, mean per generation:"));
  EXPECT_THAT(history.output, HasSubstr("abs_sum"));

  // Plotted: one line per island and metric.
  const std::string page = dir_.File("metrics.html");
  ASSERT_EQ(RunCommand(Cli({"report", "1", "-o", page})).exit_code, 0);
  Page shown = Browse(
      {"file://" + page, kChartsDone,
       "({lines: String(window.skerryCharts['chart-metrics'].data.datasets"
       ".length), expected: document.getElementById('script-status')"
       ".dataset.expected, drawn: document.getElementById('script-status')"
       ".dataset.drawn})",
       "", ""});
  ASSERT_TRUE(shown.ready());
  EXPECT_THAT(shown.List("errors"), ::testing::IsEmpty());
  EXPECT_EQ(shown.Value("lines"), "4");  // 2 islands x 2 metrics
  EXPECT_EQ(shown.Value("drawn"), shown.Value("expected"));
}

}  // namespace
}  // namespace skerry
