#include "server/http/fleet_status.h"

#include <sys/stat.h>
#include <sys/statvfs.h>

#include "absl/strings/str_split.h"
#include "common/status_macros.h"

namespace skerry::http {
namespace {

int64_t FileBytes(const std::string& path) {
  struct stat st;
  return ::stat(path.c_str(), &st) == 0 ? static_cast<int64_t>(st.st_size) : 0;
}

}  // namespace

absl::StatusOr<skerry::v1::ListWorkersResponse> ListWorkers(
    const CoordinatorParts& parts, uint32_t limit) {
  SKERRY_ASSIGN_OR_RETURN(
      std::vector<store::FleetStore::WorkerRow> rows,
      parts.store->fleet().ListWorkers(static_cast<int>(limit)));
  const scheduler::TaskQueue::Load load = parts.queue->load();
  const FleetMetrics::Snapshot counts = parts.metrics->Get();
  skerry::v1::ListWorkersResponse resp;
  for (const store::FleetStore::WorkerRow& row : rows) {
    const store::WorkerRecord& w = row.worker;
    skerry::v1::WorkerInfo* info = resp.add_workers();
    info->set_id(static_cast<uint64_t>(w.id));
    info->set_name(w.name);
    info->set_host(w.host);
    info->set_threads(w.threads);
    for (absl::string_view e :
         absl::StrSplit(w.evaluators, ',', absl::SkipEmpty())) {
      info->add_evaluators(std::string(e));
    }
    info->set_version(w.version);
    info->set_joined_unix_ms(w.joined_ms);
    info->set_last_seen_unix_ms(w.last_seen_ms);
    auto held = load.held_by_worker.find(w.id);
    if (held != load.held_by_worker.end()) {
      info->set_tasks_in_flight(static_cast<uint32_t>(held->second));
    }
    auto c = counts.workers.find(w.id);
    if (c != counts.workers.end()) {
      info->set_evaluations_per_second(EvaluationsPerSecond(c->second));
    }
    if (row.sandbox) info->set_sandbox(*row.sandbox);
  }
  return resp;
}

absl::StatusOr<CoordinatorGauges> GatherGauges(const CoordinatorParts& parts) {
  CoordinatorGauges g;
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::RunRecord> runs,
                          parts.store->runs().ListRuns());
  for (const store::RunRecord& r : runs) {
    g.evaluations_by_run[static_cast<uint64_t>(r.id)] =
        static_cast<uint64_t>(r.evaluations);
    g.state_by_run[static_cast<uint64_t>(r.id)] =
        skerry::v1::RunState_Name(r.state);
  }
  const scheduler::TaskQueue::Load load = parts.queue->load();
  g.queued_by_run = load.queued_by_run;
  for (const auto& [worker, n] : load.held_by_worker) g.leases_outstanding += n;
  g.workers_connected = parts.fleet->ActiveWorkers(absl::Minutes(1));
  g.database_bytes =
      FileBytes(parts.db_path) + FileBytes(parts.db_path + "-wal");
  struct statvfs fs;
  if (::statvfs(parts.db_path.c_str(), &fs) == 0) {
    g.storage_free_bytes =
        static_cast<int64_t>(fs.f_bavail) * static_cast<int64_t>(fs.f_frsize);
  }
  g.storage_problem = parts.engine->StorageProblem();
  return g;
}

}  // namespace skerry::http
