// The store's validation methods (schema version 4; see store.h).
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/status_macros.h"
#include "server/store/store.h"

namespace skerry::store {
namespace {

// Columns of validations v joined with genomes g, in ReadValidation's order.
constexpr const char* kValidationColumns =
    "v.id, v.run_id, v.genome_id, g.island, g.generation, g.slot, v.reason, "
    "v.state, v.score, v.cases, v.attempts, v.error, v.requested_by, "
    "v.requested_ms, v.completed_ms, v.copied_from, g.eval_state, g.score";
constexpr const char* kValidationFrom =
    " FROM validations v JOIN genomes g ON g.id = v.genome_id";

ValidationRecord ReadValidation(const Statement& s) {
  ValidationRecord r;
  r.id = s.ColumnInt(0);
  r.run_id = s.ColumnInt(1);
  r.genome_id = s.ColumnInt(2);
  r.island = static_cast<uint32_t>(s.ColumnInt(3));
  r.generation = static_cast<uint32_t>(s.ColumnInt(4));
  r.slot = static_cast<uint32_t>(s.ColumnInt(5));
  r.reason = static_cast<skerry::v1::ValidationReason>(s.ColumnInt(6));
  r.state = static_cast<skerry::v1::ValidationState>(s.ColumnInt(7));
  r.score = s.ColumnIsNull(8) ? 0.0 : s.ColumnDouble(8);
  r.cases = static_cast<uint32_t>(s.ColumnInt(9));
  r.attempts = static_cast<uint32_t>(s.ColumnInt(10));
  r.error = s.ColumnText(11);
  r.requested_by = s.ColumnText(12);
  r.requested_ms = s.ColumnInt(13);
  r.completed_ms = s.ColumnInt(14);
  r.copied_from = s.ColumnIsNull(15) ? 0 : s.ColumnInt(15);
  r.training_state = static_cast<skerry::v1::EvalState>(s.ColumnInt(16));
  r.training_score = s.ColumnIsNull(17) ? 0.0 : s.ColumnDouble(17);
  return r;
}

// The genes of genome `id` whose stored blob is `blob`: unpacked, or rebuilt
// when the blob is a recipe (a natural ES sample's, from its distribution
// genome; a GA genome's, from its ancestry), as every genome read is.
absl::StatusOr<std::vector<double>> GenesOf(Connection* conn, int64_t id,
                                            const std::string& blob,
                                            int64_t parent_a,
                                            int64_t parent_b) {
  auto lost = [id](const absl::Status& s) {
    return absl::DataLossError(
        absl::StrCat("genome ", id, ": stored genes: ", s.message()));
  };
  if (!IsRecipe(blob) && !IsChildRecipe(blob)) {
    absl::StatusOr<std::vector<double>> genes = UnpackGenes(blob);
    if (!genes.ok()) return lost(genes.status());
    return genes;
  }
  std::vector<GenomeRecord> one(1);
  GenomeRecord& g = one.front();
  g.id = id;
  g.parent_a = parent_a;
  g.parent_b = parent_b;
  if (IsRecipe(blob)) {
    absl::StatusOr<SampleRecipe> recipe = UnpackRecipe(blob);
    if (!recipe.ok()) return lost(recipe.status());
    g.recipe = *recipe;
    SKERRY_RETURN_IF_ERROR(Store::RebuildSamples(conn, &one));
  } else {
    absl::StatusOr<UnpackedChild> child = UnpackChildRecipe(blob);
    if (!child.ok()) return lost(child.status());
    g.child_recipe = child->recipe;
    if (child->genes.has_value()) g.genes = *std::move(child->genes);
    SKERRY_RETURN_IF_ERROR(Store::RebuildChildren(conn, &one));
  }
  return std::move(g.genes);
}

}  // namespace

absl::StatusOr<std::vector<ValidationRecord>> Store::QueryValidations(
    Statement* s, bool with_genes) {
  std::vector<ValidationRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s->Step());
    if (!row) break;
    ValidationRecord r = ReadValidation(*s);
    if (with_genes) {
      SKERRY_ASSIGN_OR_RETURN(
          r.genes, GenesOf(conn_.get(), r.genome_id, s->ColumnBlob(18),
                           s->ColumnIsNull(19) ? 0 : s->ColumnInt(19),
                           s->ColumnIsNull(20) ? 0 : s->ColumnInt(20)));
    }
    out.push_back(std::move(r));
  }
  return out;
}

absl::StatusOr<ValidationRecord> Store::RequestValidation(
    const ValidationRequest& request) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_ASSIGN_OR_RETURN(ValidationRecord r, RequestValidationLocked(request));
  SKERRY_RETURN_IF_ERROR(txn.Commit());
  return r;
}

absl::StatusOr<ValidationRecord> Store::RequestValidationLocked(
    const ValidationRequest& request) {
  SKERRY_ASSIGN_OR_RETURN(std::optional<ValidationRecord> existing,
                          GetValidationLocked(request.genome_id));
  if (existing.has_value()) return *std::move(existing);

  // The genome, and its parent's finished validation when it is a copy.
  SKERRY_ASSIGN_OR_RETURN(
      auto g,
      conn_->Prepare("SELECT g.run_id, g.generation, g.origin, p.id, p.state, "
                     "p.score, p.cases FROM genomes g LEFT JOIN validations p "
                     "ON p.genome_id = g.parent_a AND p.state = 2 "
                     "WHERE g.id = ?"));
  g.BindInt(1, request.genome_id);
  SKERRY_ASSIGN_OR_RETURN(bool found, g.Step());
  if (!found) {
    return absl::NotFoundError(absl::StrCat(
        "genome ", static_cast<uint64_t>(request.genome_id), " not found"));
  }
  const int64_t run_id = g.ColumnInt(0);
  const int64_t generation = g.ColumnInt(1);
  const auto origin = static_cast<skerry::v1::Origin>(g.ColumnInt(2));
  const bool copy =
      (origin == skerry::v1::ELITE || origin == skerry::v1::MIGRANT) &&
      !g.ColumnIsNull(3);
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      conn_->Prepare("INSERT INTO validations (run_id, genome_id, generation, "
                     "reason, state, score, cases, requested_by, requested_ms, "
                     "completed_ms, copied_from, id) "
                     "VALUES (?,?,?,?,?,?,?,?,?,?,?,?)"));
  // Above every id ever given (a validation task's id derives from it).
  SKERRY_ASSIGN_OR_RETURN(const int64_t largest,
                          LargestIdLocked(IdTable::kValidations));
  ins.BindInt(12, largest + 1);
  ins.BindInt(1, run_id);
  ins.BindInt(2, request.genome_id);
  ins.BindInt(3, generation);
  ins.BindInt(4, request.reason);
  if (copy) {
    ins.BindInt(5, skerry::v1::VALIDATION_DONE);
    ins.BindDouble(6, g.ColumnDouble(5));
    ins.BindInt(7, g.ColumnInt(6));
    ins.BindInt(10, request.now_ms);
    ins.BindInt(11, g.ColumnInt(3));
  } else {
    ins.BindInt(5, skerry::v1::VALIDATION_PENDING);
    ins.BindNull(6);
    ins.BindInt(7, request.cases);
    ins.BindInt(10, 0);
    ins.BindNull(11);
  }
  ins.BindText(8, request.requested_by);
  ins.BindInt(9, request.now_ms);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  SKERRY_ASSIGN_OR_RETURN(existing, GetValidationLocked(request.genome_id));
  if (!existing.has_value()) {
    return absl::InternalError("validation not found right after its insert");
  }
  return *std::move(existing);
}

absl::Status Store::CommitValidations(
    absl::Span<const ValidationUpdate> updates) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  SKERRY_RETURN_IF_ERROR(ApplyValidationsLocked(updates));
  return txn.Commit();
}

// A validation no longer pending (trimmed with its generation, or finished
// already) is left alone.
absl::Status Store::ApplyValidationsLocked(
    absl::Span<const ValidationUpdate> updates) {
  if (updates.empty()) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, conn_->Prepare("UPDATE validations SET state = ?, score = ?, "
                               "attempts = ?, error = ?, completed_ms = ? "
                               "WHERE id = ? AND state = 1"));
  for (const ValidationUpdate& u : updates) {
    upd.BindInt(1, u.state);
    if (u.state == skerry::v1::VALIDATION_DONE) {
      upd.BindDouble(2, u.score);
    } else {
      upd.BindNull(2);
    }
    upd.BindInt(3, u.attempts);
    upd.BindText(4, u.error);
    upd.BindInt(5, u.state == skerry::v1::VALIDATION_PENDING ? 0 : u.now_ms);
    upd.BindInt(6, u.id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<ValidationRecord>> Store::PendingValidations() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn_->Prepare(absl::StrCat(
          "SELECT ", kValidationColumns, ", g.genes, g.parent_a, g.parent_b",
          kValidationFrom, " WHERE v.state = 1 ORDER BY v.id")));
  return QueryValidations(&s, true);
}

absl::StatusOr<std::optional<ValidationRecord>> Store::GetValidation(
    int64_t genome_id) {
  absl::MutexLock l(&mu_);
  return GetValidationLocked(genome_id);
}

absl::StatusOr<std::optional<ValidationRecord>> Store::GetValidationLocked(
    int64_t genome_id) {
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn_->Prepare(absl::StrCat("SELECT ", kValidationColumns,
                                  kValidationFrom, " WHERE v.genome_id = ?")));
  s.BindInt(1, genome_id);
  SKERRY_ASSIGN_OR_RETURN(auto rows, QueryValidations(&s, false));
  if (rows.empty()) return std::optional<ValidationRecord>();
  return std::optional<ValidationRecord>(std::move(rows.front()));
}

absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>>
Store::ChampionValidationScores(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT g.island, g.generation, v.score", kValidationFrom,
                  " WHERE v.run_id = ? AND v.reason = ? AND v.state = ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, skerry::v1::GENERATION_CHAMPION);
  s.BindInt(3, skerry::v1::VALIDATION_DONE);
  std::map<std::pair<uint32_t, uint32_t>, double> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    out[{static_cast<uint32_t>(s.ColumnInt(0)),
         static_cast<uint32_t>(s.ColumnInt(1))}] = s.ColumnDouble(2);
  }
  return out;
}

absl::StatusOr<std::vector<ValidationRecord>> Store::ListValidations(
    int64_t run_id, int limit) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(
      auto s, conn_->Prepare(absl::StrCat(
                  "SELECT ", kValidationColumns, kValidationFrom,
                  " WHERE v.run_id = ? ORDER BY v.id DESC LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, limit);
  return QueryValidations(&s, false);
}

}  // namespace skerry::store
