// Store (store.h): the database and its stores, and the checks across them.
#include "server/store/store.h"

#include <optional>
#include <utility>
#include <vector>

#include "common/status_macros.h"

namespace skerry::store {

absl::StatusOr<std::unique_ptr<Store>> Store::Open(const std::string& path) {
  return Open(path, Options());
}

absl::StatusOr<std::unique_ptr<Store>> Store::Open(const std::string& path,
                                                   const Options& options) {
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<Database> db,
                          Database::Open(path, options));
  return std::unique_ptr<Store>(new Store(std::move(db)));
}

absl::Status Store::VerifyActiveRun(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(RunRecord run, runs_.GetRun(run_id));
  SKERRY_ASSIGN_OR_RETURN(std::vector<IslandRecord> islands,
                          runs_.GetIslands(run_id));
  SKERRY_RETURN_IF_ERROR(runs_.GetStats(run_id, std::nullopt).status());
  SKERRY_RETURN_IF_ERROR(runs_.GetStrategyStates(run_id).status());
  for (const IslandRecord& i : islands) {
    SKERRY_RETURN_IF_ERROR(
        genomes_.GetGeneration(run_id, i.index, i.generation).status());
  }
  return absl::OkStatus();
}

}  // namespace skerry::store
