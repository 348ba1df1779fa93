#include "server/coordinator_flags.h"

#include <optional>
#include <string>
#include <utility>

#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "common/host_port.h"
#include "server/api/fleet_service.h"
#include "server/auth/access_control.h"

namespace skerry::server {
namespace {

// A task must fit in a lease answer with room to spare.
constexpr uint64_t kMaxTaskBytesFlag = api::FleetServiceImpl::kMaxLeaseBytes;

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
  CoordinatorFlags f;
  for (int i = 1; i < argc; ++i) {
    std::string arg = argv[i];
    // --name=value is --name value, as the worker and the CLI take it.
    std::optional<std::string> inline_value;
    if (absl::StartsWith(arg, "--")) {
      const size_t eq = arg.find('=');
      if (eq != std::string::npos) {
        inline_value = arg.substr(eq + 1);
        arg.resize(eq);
      }
    }
    auto value = [&](const char* name) -> absl::StatusOr<std::string> {
      if (inline_value.has_value()) {
        std::string v = *std::move(inline_value);
        inline_value.reset();
        return v;
      }
      if (i + 1 >= argc) {
        return absl::InvalidArgumentError(
            absl::StrCat(name, ": needs a value"));
      }
      return std::string(argv[++i]);
    };
    auto number = [&](const char* name, double lo,
                      double hi) -> absl::StatusOr<double> {
      absl::StatusOr<std::string> v = value(name);
      if (!v.ok()) return v.status();
      double d = 0;
      if (!absl::SimpleAtod(*v, &d) || !(d >= lo && d <= hi)) {
        return absl::InvalidArgumentError(
            absl::StrCat(name, ": expected a number from ", lo, " to ", hi,
                         ", got \"", *v, "\""));
      }
      return d;
    };
    if (arg == "--help" || arg == "-h") {
      f.help = true;
    } else if (arg == "--version") {
      f.version = true;
    } else if (arg == "--read-only") {
      f.options.read_only = true;
    } else if (arg == "--check") {
      absl::StatusOr<std::string> v = value("--check");
      if (!v.ok()) return v.status();
      f.check_db = *v;
    } else if (arg == "--import") {
      absl::StatusOr<std::string> v = value("--import");
      if (!v.ok()) return v.status();
      f.import_file = *v;
    } else if (arg == "--init-admin") {
      absl::StatusOr<std::string> v = value("--init-admin");
      if (!v.ok()) return v.status();
      f.init_admin = *v;
    } else if (arg == "--auth") {
      absl::StatusOr<std::string> v = value("--auth");
      if (!v.ok()) return v.status();
      absl::StatusOr<auth::AuthMode> mode = auth::ParseAuthMode(*v);
      if (!mode.ok()) return mode.status();
      f.options.auth = *mode;
    } else if (arg == "--tls-cert" || arg == "--tls-key" ||
               arg == "--tls-client-ca") {
      absl::StatusOr<std::string> v = value(arg.c_str());
      if (!v.ok()) return v.status();
      std::string& field = arg == "--tls-cert"  ? f.options.tls_cert_file
                           : arg == "--tls-key" ? f.options.tls_key_file
                                                : f.options.tls_client_ca_file;
      field = *v;
    } else if (arg == "--http" || arg == "--chart-library") {
      absl::StatusOr<std::string> v = value(arg.c_str());
      if (!v.ok()) return v.status();
      if (arg == "--http") {
        absl::StatusOr<HostPort> address =
            ParseHostPort("--http", *v, /*allow_port_zero=*/true);
        if (!address.ok()) return address.status();
      }
      (arg == "--http" ? f.options.http_address : f.options.chart_library) = *v;
    } else if (arg == "--db") {
      absl::StatusOr<std::string> v = value("--db");
      if (!v.ok()) return v.status();
      f.options.db_path = *v;
    } else if (arg == "--listen") {
      absl::StatusOr<std::string> v = value("--listen");
      if (!v.ok()) return v.status();
      absl::StatusOr<HostPort> address =
          ParseHostPort("--listen", *v, /*allow_port_zero=*/true);
      if (!address.ok()) return address.status();
      f.options.listen_address = *v;
    } else if (arg == "--lease-seconds") {
      absl::StatusOr<double> v = number("--lease-seconds", 0.1, 86400);
      if (!v.ok()) return v.status();
      f.options.lease = absl::Seconds(*v);
    } else if (arg == "--max-watchers") {
      absl::StatusOr<double> v = number("--max-watchers", 1, 100000);
      if (!v.ok()) return v.status();
      if (*v != static_cast<double>(static_cast<size_t>(*v))) {
        return absl::InvalidArgumentError(
            absl::StrCat("--max-watchers: expected a whole number, got ", *v));
      }
      f.options.max_watchers = static_cast<size_t>(*v);
    } else if (arg == "--max-generation-genes" ||
               arg == "--max-generation-genomes" ||
               arg == "--max-evaluator-bytes" || arg == "--max-name-bytes" ||
               arg == "--max-task-bytes") {
      const bool task = arg == "--max-task-bytes";
      absl::StatusOr<std::string> v = value(arg.c_str());
      if (!v.ok()) return v.status();
      uint64_t n = 0;
      const uint64_t hi = task ? kMaxTaskBytesFlag : uint64_t{1} << 40;
      if (!absl::SimpleAtoi(*v, &n) || n < 1 || n > hi) {
        return absl::InvalidArgumentError(absl::StrCat(
            arg, ": expected a whole number from 1 to ", hi, ", got \"",
            v->substr(0, 32), v->size() > 32 ? "...\"" : "\""));
      }
      SpecBudgets& b = f.options.budgets;
      uint64_t& field =
          arg == "--max-generation-genomes" ? b.max_generation_genomes
          : arg == "--max-generation-genes" ? b.max_generation_genes
          : arg == "--max-evaluator-bytes"  ? b.max_evaluator_bytes
          : arg == "--max-name-bytes"       ? b.max_name_bytes
                                            : b.max_task_bytes;
      field = n;
    } else if (arg == "--max-wait-ms") {
      absl::StatusOr<double> v = number("--max-wait-ms", 0, 600000);
      if (!v.ok()) return v.status();
      f.options.max_lease_wait = absl::Milliseconds(*v);
    } else {
      return absl::InvalidArgumentError(
          absl::StrCat("unknown argument \"", arg, "\""));
    }
    if (inline_value.has_value()) {
      return absl::InvalidArgumentError(
          absl::StrCat(arg, ": takes no value, got \"", *inline_value, "\""));
    }
  }
  if (!f.help && !f.version && f.check_db.empty() &&
      f.options.db_path.empty()) {
    return absl::InvalidArgumentError("--db: a database file is required");
  }
  return f;
}

}  // namespace skerry::server
