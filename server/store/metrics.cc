// GenomeStore's evaluator metrics (table genome_metrics; genome_store.h).
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/genome_store.h"

namespace skerry::store {

absl::Status GenomeStore::InsertMetrics(Database::Writer& w,
                                        const ResultUpdate& r) {
  SKERRY_ASSIGN_OR_RETURN(auto ins,
                          w->Prepare("INSERT OR REPLACE INTO genome_metrics "
                                     "(run_id, genome_id, name, value) "
                                     "VALUES (?, ?, ?, ?)"));
  for (const auto& [name, value] : r.metrics) {
    ins.BindInt(1, r.run_id);
    ins.BindInt(2, r.genome_id);
    ins.BindText(3, name);
    ins.BindDouble(4, value);
    SKERRY_RETURN_IF_ERROR(ins.Run());
  }
  return absl::OkStatus();
}

absl::StatusOr<std::map<std::string, double>> GenomeStore::GetGenomeMetrics(
    int64_t genome_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached("SELECT name, value FROM genome_metrics WHERE "
                            "genome_id = ? ORDER BY name"));
  s.BindInt(1, genome_id);
  std::map<std::string, double> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    out[s.ColumnText(0)] = s.ColumnDouble(1);
  }
  return out;
}

absl::StatusOr<
    std::map<std::pair<uint32_t, uint32_t>, std::map<std::string, double>>>
GenomeStore::MetricMeans(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(
                  "SELECT g.island, g.generation, m.name, avg(m.value) "
                  "FROM genome_metrics m JOIN genomes g ON g.id = "
                  "m.genome_id WHERE m.run_id = ? GROUP BY g.island, "
                  "g.generation, m.name"));
  s.BindInt(1, run_id);
  std::map<std::pair<uint32_t, uint32_t>, std::map<std::string, double>> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    out[{static_cast<uint32_t>(s.ColumnInt(0)),
         static_cast<uint32_t>(s.ColumnInt(1))}][s.ColumnText(2)] =
        s.ColumnDouble(3);
  }
  return out;
}

}  // namespace skerry::store
