// StudyService (study.proto): seed series and run extension. Every field from
// outside is checked here first; the engine stores and starts the runs, so a
// change is committed before it is answered, and each change is noted for the
// audit log.
//
// Thread safety: gRPC calls the handlers from many threads; the service holds
// no state of its own.
#ifndef SKERRY_SERVER_API_STUDY_SERVICE_H_
#define SKERRY_SERVER_API_STUDY_SERVICE_H_

#include <cstdint>
#include <string>

#include "common/spec.h"
#include "server/auth/access_control.h"
#include "server/engine/engine.h"
#include "server/store/store.h"
#include "skerry/v1/study.grpc.pb.h"

namespace skerry::api {

// The most seeds of one series.
inline constexpr size_t kMaxSeriesSeeds = 100;
// A series name's longest length.
inline constexpr size_t kMaxSeriesNameBytes = 64;

// InvalidArgument unless `name` is 1 to kMaxSeriesNameBytes of letters, digits
// and ".-_" (so that it can never be read as a run id: not all digits).
absl::Status CheckSeriesName(const std::string& name);

class StudyServiceImpl final : public skerry::v1::StudyService::Service {
 public:
  StudyServiceImpl(store::Store* store, engine::Engine* engine,
                   auth::AccessControl* access, SpecBudgets budgets = {})
      : store_(store), engine_(engine), access_(access), budgets_(budgets) {}

  grpc::Status SubmitSeries(grpc::ServerContext* ctx,
                            const skerry::v1::SubmitSeriesRequest* req,
                            skerry::v1::SubmitSeriesResponse* resp) override;
  grpc::Status ExtendRun(grpc::ServerContext* ctx,
                         const skerry::v1::ExtendRunRequest* req,
                         skerry::v1::RunSummary* resp) override;

 private:
  store::Store* const store_;
  engine::Engine* const engine_;
  auth::AccessControl* const access_;
  const SpecBudgets budgets_;
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_STUDY_SERVICE_H_
