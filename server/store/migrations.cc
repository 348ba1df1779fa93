// GenomeStore::MigrationCounts: every migration event of a run, for the
// report's migration chart. A migrant is a genome of origin MIGRANT, a copy of
// its parent a from another island's previous generation (server/engine/
// breeder.h), so (its island, its generation, its parent's island) is one
// event of one island pair.
#include <map>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/genome_store.h"
#include "server/store/row_sums.h"

namespace skerry::store {

absl::StatusOr<
    std::map<std::pair<uint32_t, uint32_t>, std::map<uint32_t, uint32_t>>>
GenomeStore::MigrationCounts(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  // Each migrant row is verified against its checksum (row_sums.h): a damaged
  // one is DATA_LOSS naming it, never a wrong count.
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT g.island, g.generation, (SELECT p.island FROM genomes p "
          "WHERE p.id = g.parent_a), count(*) FROM genomes g WHERE g.run_id "
          "= ?1 AND g.origin = ?2 AND ",
          kGenomeCheckedG, " GROUP BY 1, 2, 3")));
  s.BindInt(1, run_id);
  s.BindInt(2, skerry::v1::MIGRANT);
  std::map<std::pair<uint32_t, uint32_t>, std::map<uint32_t, uint32_t>> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    if (s.ColumnIsNull(2)) {
      return DamagedRow(
          run_id,
          absl::StrCat("island ", s.ColumnInt(0), " generation ",
                       s.ColumnInt(1), ": a migrant's parent is missing"));
    }
    out[{static_cast<uint32_t>(s.ColumnInt(0)),
         static_cast<uint32_t>(s.ColumnInt(1))}]
       [static_cast<uint32_t>(s.ColumnInt(2))] =
           static_cast<uint32_t>(s.ColumnInt(3));
  }
  return out;
}

}  // namespace skerry::store
