// ValidationStore (validation_store.h).
#include "server/store/validation_store.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/status_macros.h"
#include "server/store/genome_store.h"

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

}  // namespace

absl::StatusOr<std::vector<ValidationRecord>> ValidationStore::Query(
    Connection* conn, Statement* s, bool with_genes) {
  std::vector<ValidationRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s->Step());
    if (!row) break;
    ValidationRecord r = ReadValidation(*s);
    if (with_genes) {
      SKERRY_ASSIGN_OR_RETURN(
          r.genes,
          GenomeStore::GenesOf(conn, r.genome_id, s->ColumnBlob(18),
                               s->ColumnIsNull(19) ? 0 : s->ColumnInt(19),
                               s->ColumnIsNull(20) ? 0 : s->ColumnInt(20)));
    }
    out.push_back(std::move(r));
  }
  return out;
}

absl::StatusOr<ValidationRecord> ValidationStore::RequestValidation(
    const ValidationRequest& request) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_ASSIGN_OR_RETURN(ValidationRecord r, Request(w, request));
  SKERRY_RETURN_IF_ERROR(txn.Commit());
  return r;
}

absl::StatusOr<ValidationRecord> ValidationStore::Request(
    Database::Writer& w, const ValidationRequest& request) {
  if (request.genome != nullptr) {
    SKERRY_RETURN_IF_ERROR(GenomeStore::KeepWhole(w, *request.genome));
  }
  SKERRY_ASSIGN_OR_RETURN(std::optional<ValidationRecord> existing,
                          Get(w.conn(), request.genome_id));
  if (existing.has_value()) return *std::move(existing);

  // The genome, and its parent's finished validation when it is a copy.
  SKERRY_ASSIGN_OR_RETURN(
      auto g,
      w->Prepare("SELECT g.run_id, g.generation, g.origin, p.id, p.state, "
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
      w->Prepare("INSERT INTO validations (run_id, genome_id, generation, "
                 "reason, state, score, cases, requested_by, requested_ms, "
                 "completed_ms, copied_from, id) "
                 "VALUES (?,?,?,?,?,?,?,?,?,?,?,?)"));
  // Above every id ever given (a validation task's id derives from it).
  SKERRY_ASSIGN_OR_RETURN(
      const int64_t largest,
      Database::LargestId(w, Database::IdTable::kValidations));
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
  SKERRY_ASSIGN_OR_RETURN(existing, Get(w.conn(), request.genome_id));
  if (!existing.has_value()) {
    return absl::InternalError("validation not found right after its insert");
  }
  return *std::move(existing);
}

absl::Status ValidationStore::CommitValidations(
    absl::Span<const ValidationUpdate> updates) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_RETURN_IF_ERROR(Apply(w, updates));
  return txn.Commit();
}

absl::Status ValidationStore::Apply(
    Database::Writer& w, absl::Span<const ValidationUpdate> updates) {
  if (updates.empty()) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, w->Prepare("UPDATE validations SET state = ?, score = ?, "
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

absl::StatusOr<std::vector<ValidationRecord>>
ValidationStore::PendingValidations() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT ", kValidationColumns, ", g.genes, g.parent_a, g.parent_b",
          kValidationFrom, " WHERE v.state = 1 ORDER BY v.id")));
  return Query(reader.get(), &s, true);
}

absl::StatusOr<std::optional<ValidationRecord>> ValidationStore::GetValidation(
    int64_t genome_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  return Get(reader.get(), genome_id);
}

absl::StatusOr<std::optional<ValidationRecord>> ValidationStore::Get(
    Connection* conn, int64_t genome_id) {
  SKERRY_ASSIGN_OR_RETURN(
      auto s, conn->PrepareCached(absl::StrCat("SELECT ", kValidationColumns,
                                               kValidationFrom,
                                               " WHERE v.genome_id = ?")));
  s.BindInt(1, genome_id);
  SKERRY_ASSIGN_OR_RETURN(auto rows, Query(conn, &s, false));
  if (rows.empty()) return std::optional<ValidationRecord>();
  return std::optional<ValidationRecord>(std::move(rows.front()));
}

absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>>
ValidationStore::ChampionValidationScores(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
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

absl::StatusOr<std::vector<ValidationRecord>> ValidationStore::ListValidations(
    int64_t run_id, int limit) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT ", kValidationColumns, kValidationFrom,
                  " WHERE v.run_id = ? ORDER BY v.id DESC LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, limit);
  return Query(reader.get(), &s, false);
}

}  // namespace skerry::store
