// skerry-coordinator: flags, the object graph, serve until SIGINT, SIGTERM
// or SIGHUP.
#include <pthread.h>
#include <signal.h>
#include <unistd.h>

#include <cstdio>
#include <string>
#include <thread>

#include "common/version.h"
#include "server/coordinator.h"
#include "server/coordinator_flags.h"
#include "server/store/check.h"
#include "server/store/run_transfer.h"

int main(int argc, char** argv) {
  absl::StatusOr<skerry::server::CoordinatorFlags> flags =
      skerry::server::ParseCoordinatorFlags(argc, argv);
  if (!flags.ok()) {
    std::fprintf(stderr, "skerry-coordinator: %s\n(see --help)\n",
                 std::string(flags.status().message()).c_str());
    return 2;
  }
  if (flags->help) {
    std::fputs(skerry::server::CoordinatorUsage().c_str(), stdout);
    return 0;
  }
  if (flags->version) {
    std::fputs(skerry::VersionLine("skerry-coordinator").c_str(), stdout);
    return 0;
  }
  if (!flags->check_db.empty()) {
    absl::StatusOr<skerry::store::CheckReport> report =
        skerry::store::CheckDatabase(flags->check_db,
                                     flags->options.budgets.max_name_bytes);
    if (!report.ok()) {
      std::fprintf(stderr, "skerry-coordinator: --check %s: %s\n",
                   flags->check_db.c_str(),
                   std::string(report.status().message()).c_str());
      return 2;
    }
    std::fputs(report->ToString().c_str(), stdout);
    return report->ok() ? 0 : 1;
  }
  if (!flags->import_file.empty()) {
    absl::StatusOr<std::string> imported = skerry::store::ImportIntoDatabase(
        flags->options.db_path, flags->import_file);
    if (!imported.ok()) {
      std::fprintf(stderr, "skerry-coordinator: --import: %s\n",
                   std::string(imported.status().message()).c_str());
      return 1;
    }
    std::fputs(imported->c_str(), stdout);
    return 0;
  }
  if (!flags->init_admin.empty()) {
    auto admin = skerry::server::InitFirstAdmin(flags->options.db_path,
                                                flags->init_admin);
    if (!admin.ok()) {
      std::fprintf(stderr, "skerry-coordinator: --init-admin: %s\n",
                   std::string(admin.status().message()).c_str());
      return 1;
    }
    std::fprintf(stderr,
                 "skerry-coordinator: admin '%s' created (token %lld); its "
                 "token follows, shown this once. Access control is on from "
                 "the next start.\n",
                 flags->init_admin.c_str(),
                 static_cast<long long>(admin->record.id));
    std::printf("%s\n", admin->secret.c_str());
    return 0;
  }
  // Signals are taken with sigwait, never by a handler. SIGHUP (the terminal
  // closed, or `kill -HUP`) stops the coordinator like SIGTERM: it has no
  // configuration to reload and logs to stderr (docs/operations.md).
  sigset_t signals;
  sigemptyset(&signals);
  sigaddset(&signals, SIGINT);
  sigaddset(&signals, SIGTERM);
  sigaddset(&signals, SIGHUP);
  pthread_sigmask(SIG_BLOCK, &signals, nullptr);

  absl::StatusOr<std::unique_ptr<skerry::server::Coordinator>> c =
      skerry::server::Coordinator::Start(flags->options);
  if (!c.ok()) {
    std::fprintf(stderr, "skerry-coordinator: %s\n",
                 std::string(c.status().message()).c_str());
    return 1;
  }
  std::printf("skerry-coordinator: listening on port %d (database %s)\n",
              (*c)->port(), flags->options.db_path.c_str());
  if ((*c)->http_port() != 0) {
    std::printf("skerry-coordinator: web page on %s port %d\n",
                (*c)->http_tls() ? "https" : "http", (*c)->http_port());
  }
  std::printf("skerry-coordinator: %s\nskerry-coordinator: transport: %s\n",
              (*c)->AccessSummary().c_str(), (*c)->TransportSummary().c_str());
  std::fflush(stdout);
  // The main thread alone owns shutdown: it waits for the signal, stops the
  // coordinator (bounded in time, Coordinator::Shutdown), destroys it, and
  // only then returns; no other thread touches it meanwhile.
  int sig = 0;
  while (sigwait(&signals, &sig) != 0) {
  }
  std::fprintf(stderr,
               "skerry-coordinator: signal %d, shutting down (signal again to "
               "exit at once)\n",
               sig);
  std::thread([signals] {
    int again = 0;
    while (sigwait(&signals, &again) != 0) {
    }
    std::fprintf(stderr, "skerry-coordinator: signal %d again, exiting now\n",
                 again);
    _exit(128 + again);
  }).detach();
  (*c)->Shutdown();
  c->reset();
  std::fprintf(stderr, "skerry-coordinator: stopped\n");
  return 0;
}
