// What the coordinator tells about itself beyond runs: the worker list
// (AdminService.ListWorkers, the live page) and the gauges of /metrics. Both
// read the store, the task queue, the fleet service and the engine; nothing
// here writes.
//
// Thread safety: the functions may be called from any thread; the parts they
// read are thread-safe.
#ifndef SKERRY_SERVER_HTTP_FLEET_STATUS_H_
#define SKERRY_SERVER_HTTP_FLEET_STATUS_H_

#include <string>

#include "absl/status/statusor.h"
#include "common/clock.h"
#include "server/api/fleet_service.h"
#include "server/engine/engine.h"
#include "server/http/fleet_metrics.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "skerry/v1/admin.pb.h"

namespace skerry::http {

struct CoordinatorParts {
  store::Store* store = nullptr;
  scheduler::TaskQueue* queue = nullptr;
  api::FleetServiceImpl* fleet = nullptr;
  engine::Engine* engine = nullptr;
  FleetMetrics* metrics = nullptr;
  Clock* clock = nullptr;
  std::string db_path;
};

absl::StatusOr<skerry::v1::ListWorkersResponse> ListWorkers(
    const CoordinatorParts& parts, uint32_t limit);

absl::StatusOr<CoordinatorGauges> GatherGauges(const CoordinatorParts& parts);

}  // namespace skerry::http

#endif  // SKERRY_SERVER_HTTP_FLEET_STATUS_H_
