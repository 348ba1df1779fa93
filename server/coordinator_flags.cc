#include "server/coordinator_flags.h"

#include <algorithm>
#include <string>
#include <vector>

#include "absl/flags/flag.h"
#include "absl/strings/str_cat.h"
#include "common/daemon_flags.h"
#include "common/host_port.h"
#include "server/api/fleet_service.h"
#include "server/auth/access_control.h"

// The coordinator's flags, written with '-' for '_' (common/daemon_flags.h).
// They hold what the command line says; CoordinatorOptions keeps the defaults
// of the flags not given. The help of each is CoordinatorUsage().
using skerry::HostPort;
using WatcherCount = skerry::WholeNumber<1, 100000>;
using Budget = skerry::WholeNumber<1, uint64_t{1} << 40>;
// A task must fit in a lease answer with room to spare.
using TaskBudget =
    skerry::WholeNumber<1, skerry::api::FleetServiceImpl::kMaxLeaseBytes>;
ABSL_FLAG(std::string, db, "", "database file (created when missing)");
ABSL_FLAG(HostPort, listen, HostPort({"127.0.0.1", 7431}),
          "address to serve on; port 0 picks a free port");
ABSL_FLAG(double, lease_seconds, 30,
          "how long a worker holds tasks without renewing");
ABSL_FLAG(double, max_wait_ms, 10000, "cap on a worker's long poll");
ABSL_FLAG(std::string, init_admin, "",
          "create the first admin principal, print its token, exit");
ABSL_FLAG(std::string, auth, "auto", "when tokens are checked: auto|on|off");
ABSL_FLAG(std::string, tls_cert, "", "TLS certificate chain (PEM)");
ABSL_FLAG(std::string, tls_key, "", "TLS private key (PEM)");
ABSL_FLAG(std::string, tls_client_ca, "",
          "require client certificates signed by this CA (PEM)");
ABSL_FLAG(HostPort, http, HostPort(),
          "also serve the web page and /metrics here (default: off)");
ABSL_FLAG(bool, read_only, false, "serve an existing database unchanged");
ABSL_FLAG(std::string, chart_library,
          "/usr/share/javascript/chart.js/chart.min.js",
          "Chart.js for the web page");
ABSL_FLAG(WatcherCount, max_watchers, {256}, "concurrent watch streams served");
ABSL_FLAG(Budget, max_generation_genes, {},
          "budget: genes of one generation of a run");
ABSL_FLAG(Budget, max_generation_genomes, {},
          "budget: genomes of one generation of a run");
ABSL_FLAG(Budget, max_evaluator_bytes, {},
          "budget: bytes of a run's serialised evaluator spec");
ABSL_FLAG(Budget, max_name_bytes, {}, "budget: bytes of a run's name");
ABSL_FLAG(TaskBudget, max_task_bytes, {}, "budget: bytes of one task");
ABSL_FLAG(std::string, check, "", "check a database, print a report, exit");
ABSL_FLAG(std::string, import, "", "import the runs of a backup file, exit");

namespace skerry::server {
namespace {

constexpr char kLeaseRange[] = "a number from 0.1 to 86400";
constexpr char kWaitRange[] = "a number from 0 to 600000";

constexpr DaemonFlag kFlags[] = {
    {"db"},
    {"listen"},
    {"lease-seconds", kLeaseRange},
    {"max-wait-ms", kWaitRange},
    {"init-admin"},
    {"auth"},
    {"tls-cert"},
    {"tls-key"},
    {"tls-client-ca"},
    {"http"},
    {"read-only"},
    {"chart-library"},
    {"max-watchers"},
    {"max-generation-genes"},
    {"max-generation-genomes"},
    {"max-evaluator-bytes"},
    {"max-name-bytes"},
    {"max-task-bytes"},
    {"check"},
    {"import"},
};

}  // namespace

std::string CoordinatorUsage() {
  return R"(Usage: skerry-coordinator --db FILE [--listen HOST:PORT] [options]

Holds every run's populations and lineage in the SQLite file FILE, runs the
search, and serves workers (FleetService) and people (RunService) over gRPC.
Started on an existing database, it resumes every run that was running.
Stop it with SIGINT or SIGTERM; killing it outright loses nothing committed.

  --db FILE             database file (created when missing)
  --listen HOST:PORT    address to serve on (default 127.0.0.1:7431; port 0
                        picks a free port, printed at start)
  --lease-seconds N     how long a worker holds tasks without renewing
                        (default 30)
  --max-wait-ms N       cap on a worker's long poll (default 10000)
  --init-admin NAME     create the first admin principal NAME in the
                        database, print its token once and exit; refused
                        while an admin with a live token exists or a
                        coordinator runs on the database. Turns access
                        control on (see --auth).
  --auth auto|on|off    when tokens are checked: auto (default) checks them
                        once the database holds a principal (after
                        --init-admin); on requires that; off checks nothing
                        and everyone acts as 'local' (admin): for recovery
  --tls-cert FILE       serve TLS with this PEM certificate chain ...
  --tls-key FILE        ... and this PEM private key
  --tls-client-ca FILE  require every client to present a certificate
                        signed by this PEM CA (needs --tls-cert)
  --http HOST:PORT      also serve a read-only web page (live charts of the
                        runs, the workers, queue and storage) and Prometheus
                        metrics at /metrics on this address (port 0: a free
                        one, printed at start); same tokens as gRPC (a
                        viewer's is enough) and, with --tls-cert, HTTPS with
                        the same certificate. Off by default. docs/report.md
  --read-only           serve an existing database without writing it: no
                        migration, no work for workers; every call that
                        would change it (submit, pause, stop, tokens,
                        backup, worker Join...) is refused with
                        FAILED_PRECONDITION. Several read-only coordinators
                        may serve one file; none while a writing one runs.
                        docs/operations.md
  --chart-library FILE  Chart.js for that page (default: Debian's
                        libjs-chart.js, /usr/share/javascript/chart.js/
                        chart.min.js)
  --max-watchers N      concurrent `watch` streams served; one more is
                        refused with RESOURCE_EXHAUSTED (default 256)
  --max-generation-genes N
                        budget: genes of one generation of a run, all
                        islands (population x genome_length summed over
                        islands); a bigger spec is refused at submit
                        (default: this machine's memory in bytes / 1024,
                        at least 1048576)
  --max-generation-genomes N
                        budget: genomes of one generation of a run, all
                        islands; each generation is one transaction
                        (default 1000000)
  --max-evaluator-bytes N
                        budget: bytes of a run's serialised evaluator spec,
                        which every task carries (default 1048576)
  --max-name-bytes N    budget: bytes of a run's name (default 256)
  --max-task-bytes N    budget: bytes of one task as a worker receives it,
                        genes and evaluator spec; at most 67108864
                        (default 16777216)
  --check DB            check DB (SQLite integrity and Skerry's invariants:
                        whole generations, resolvable parent links, counters),
                        print a report and exit: 0 ok, 1 problems found,
                        2 cannot read it. Safe while a coordinator runs.
  --import FILE         import every run of FILE (a `skerry backup` of
                        another coordinator) into the --db database, with
                        new ids, and exit; refused while a coordinator serves
                        that database, and for a damaged file or one of
                        another schema version
  --help                this text
  --version             print the version and the worker protocols spoken
)";
}

absl::StatusOr<CoordinatorFlags> ParseCoordinatorFlags(
    int argc, const char* const* argv) {
  // Only the flags given are read: each parse sets them afresh, so one left
  // from an earlier parse in this process (tests) is never seen.
  const std::vector<std::string> args(argv + std::min(argc, 1), argv + argc);
  absl::StatusOr<DaemonCommandLine> line =
      ParseDaemonFlags(args, kFlags, /*repeats=*/true);
  if (!line.ok()) return line.status();
  CoordinatorFlags f;
  f.help = line->help;
  f.version = line->version;
  auto given = [&](const char* name) { return line->given.count(name) > 0; };
  CoordinatorOptions& o = f.options;
  if (given("check")) f.check_db = absl::GetFlag(FLAGS_check);
  if (given("import")) f.import_file = absl::GetFlag(FLAGS_import);
  if (given("init-admin")) f.init_admin = absl::GetFlag(FLAGS_init_admin);
  o.read_only = given("read-only");
  if (given("db")) o.db_path = absl::GetFlag(FLAGS_db);
  if (given("listen"))
    o.listen_address = absl::GetFlag(FLAGS_listen).ToString();
  if (given("http")) o.http_address = absl::GetFlag(FLAGS_http).ToString();
  if (given("chart-library")) {
    o.chart_library = absl::GetFlag(FLAGS_chart_library);
  }
  if (given("tls-cert")) o.tls_cert_file = absl::GetFlag(FLAGS_tls_cert);
  if (given("tls-key")) o.tls_key_file = absl::GetFlag(FLAGS_tls_key);
  if (given("tls-client-ca")) {
    o.tls_client_ca_file = absl::GetFlag(FLAGS_tls_client_ca);
  }
  if (given("auth")) {
    absl::StatusOr<auth::AuthMode> mode =
        auth::ParseAuthMode(absl::GetFlag(FLAGS_auth));
    if (!mode.ok()) return mode.status();
    o.auth = *mode;
  }
  if (given("lease-seconds")) {
    const double seconds = absl::GetFlag(FLAGS_lease_seconds);
    if (!(seconds >= 0.1 && seconds <= 86400)) {
      return DaemonFlagError("lease-seconds", kLeaseRange,
                             absl::StrCat(seconds));
    }
    o.lease = absl::Seconds(seconds);
  }
  if (given("max-wait-ms")) {
    const double ms = absl::GetFlag(FLAGS_max_wait_ms);
    if (!(ms >= 0 && ms <= 600000)) {
      return DaemonFlagError("max-wait-ms", kWaitRange, absl::StrCat(ms));
    }
    o.max_lease_wait = absl::Milliseconds(ms);
  }
  if (given("max-watchers")) {
    o.max_watchers = absl::GetFlag(FLAGS_max_watchers).value;
  }
  SpecBudgets& b = o.budgets;
  if (given("max-generation-genes")) {
    b.max_generation_genes = absl::GetFlag(FLAGS_max_generation_genes).value;
  }
  if (given("max-generation-genomes")) {
    b.max_generation_genomes =
        absl::GetFlag(FLAGS_max_generation_genomes).value;
  }
  if (given("max-evaluator-bytes")) {
    b.max_evaluator_bytes = absl::GetFlag(FLAGS_max_evaluator_bytes).value;
  }
  if (given("max-name-bytes")) {
    b.max_name_bytes = absl::GetFlag(FLAGS_max_name_bytes).value;
  }
  if (given("max-task-bytes")) {
    b.max_task_bytes = absl::GetFlag(FLAGS_max_task_bytes).value;
  }
  if (!f.help && !f.version && f.check_db.empty() && o.db_path.empty()) {
    return absl::InvalidArgumentError("--db: a database file is required");
  }
  return f;
}

}  // namespace skerry::server
