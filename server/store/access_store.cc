// AccessStore (access_store.h): principals, tokens and the audit log.
#include "server/store/access_store.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/status_macros.h"
#include "skerry/v1/access.pb.h"

namespace skerry::store {
namespace {

constexpr const char* kTokenColumns =
    "id, principal, role, hash, note, created_ms, created_by, revoked_ms, "
    "revoked_by";

TokenRecord ReadToken(const Statement& s) {
  TokenRecord t;
  t.id = s.ColumnInt(0);
  t.principal = s.ColumnText(1);
  t.role = static_cast<int32_t>(s.ColumnInt(2));
  t.hash = s.ColumnText(3);
  t.note = s.ColumnText(4);
  t.created_ms = s.ColumnInt(5);
  t.created_by = s.ColumnText(6);
  if (!s.ColumnIsNull(7)) t.revoked_ms = s.ColumnInt(7);
  if (!s.ColumnIsNull(8)) t.revoked_by = s.ColumnText(8);
  return t;
}

}  // namespace

absl::Status AccessStore::InsertToken(Database::Writer& w, TokenRecord* t) {
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto p, w->Prepare("INSERT OR IGNORE INTO principals (name, "
                           "created_ms, created_by) VALUES (?, ?, ?)"));
    p.BindText(1, t->principal);
    p.BindInt(2, t->created_ms);
    p.BindText(3, t->created_by);
    SKERRY_RETURN_IF_ERROR(p.Run());
  }
  {
    SKERRY_ASSIGN_OR_RETURN(auto dup,
                            w->Prepare("SELECT id FROM tokens WHERE hash = ?"));
    dup.BindText(1, t->hash);
    SKERRY_ASSIGN_OR_RETURN(bool row, dup.Step());
    if (row) return absl::AlreadyExistsError("a token with this hash exists");
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto ins, w->Prepare("INSERT INTO tokens (principal, role, hash, "
                           "note, created_ms, created_by) "
                           "VALUES (?, ?, ?, ?, ?, ?)"));
  ins.BindText(1, t->principal);
  ins.BindInt(2, t->role);
  ins.BindText(3, t->hash);
  ins.BindText(4, t->note);
  ins.BindInt(5, t->created_ms);
  ins.BindText(6, t->created_by);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  t->id = w->LastInsertId();
  return absl::OkStatus();
}

absl::Status AccessStore::CreateToken(TokenRecord* token) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_RETURN_IF_ERROR(InsertToken(w, token));
  return txn.Commit();
}

absl::Status AccessStore::CreateFirstAdmin(TokenRecord* token) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto s, w->Prepare("SELECT DISTINCT principal FROM tokens WHERE "
                           "role = ? AND revoked_ms IS NULL ORDER BY 1"));
    s.BindInt(1, skerry::v1::ROLE_ADMIN);
    std::vector<std::string> admins;
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
      if (!row) break;
      admins.push_back(s.ColumnText(0));
    }
    if (!admins.empty()) {
      return absl::FailedPreconditionError(absl::StrCat(
          "an admin with a live token exists already (",
          absl::StrJoin(admins, ", "),
          "); an admin creates further tokens with `skerry token create`"));
    }
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto s, w->Prepare("SELECT role FROM tokens WHERE principal = ? "
                           "AND revoked_ms IS NULL AND role != ?"));
    s.BindText(1, token->principal);
    s.BindInt(2, skerry::v1::ROLE_ADMIN);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (row) {
      return absl::FailedPreconditionError(absl::StrCat(
          "principal '", token->principal,
          "' already holds a live token of another role; choose another name"));
    }
  }
  SKERRY_RETURN_IF_ERROR(InsertToken(w, token));
  return txn.Commit();
}

absl::StatusOr<TokenRecord> AccessStore::RevokeToken(int64_t token_id,
                                                     const std::string& by,
                                                     int64_t now_ms) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  TokenRecord t;
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto s, w->Prepare(absl::StrCat("SELECT ", kTokenColumns,
                                        " FROM tokens WHERE id = ?")));
    s.BindInt(1, token_id);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) {
      return absl::NotFoundError(absl::StrCat(
          "token ", static_cast<uint64_t>(token_id), " not found"));
    }
    t = ReadToken(s);
  }
  if (t.revoked_ms.has_value()) {
    return absl::FailedPreconditionError(absl::StrCat(
        "token ", token_id, " was revoked already, by ", t.revoked_by));
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, w->Prepare("UPDATE tokens SET revoked_ms = ?, revoked_by = ? "
                           "WHERE id = ?"));
  upd.BindInt(1, now_ms);
  upd.BindText(2, by);
  upd.BindInt(3, token_id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  SKERRY_RETURN_IF_ERROR(txn.Commit());
  t.revoked_ms = now_ms;
  t.revoked_by = by;
  return t;
}

absl::StatusOr<std::vector<TokenRecord>> AccessStore::ListTokens() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat("SELECT ", kTokenColumns,
                                                 " FROM tokens ORDER BY id")));
  std::vector<TokenRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    out.push_back(ReadToken(s));
  }
  return out;
}

absl::StatusOr<int64_t> AccessStore::CountPrincipals() {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached("SELECT count(*) FROM principals"));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  return row ? s.ColumnInt(0) : 0;
}

absl::StatusOr<int64_t> AccessStore::BeginAudit(const AuditRecord& e) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(
      auto ins, w->Prepare("INSERT INTO audit (at_ms, principal, role, "
                           "token_id, method, run_id, peer, detail) "
                           "VALUES (?, ?, ?, ?, ?, ?, ?, ?)"));
  ins.BindInt(1, e.at_ms);
  ins.BindText(2, e.principal);
  ins.BindInt(3, e.role);
  ins.BindIdOrNull(4, e.token_id);
  ins.BindText(5, e.method);
  ins.BindIdOrNull(6, e.run_id);
  ins.BindText(7, e.peer);
  ins.BindText(8, e.detail);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  return w->LastInsertId();
}

absl::Status AccessStore::FinishAudit(const AuditRecord& e) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto upd,
                          w->Prepare("UPDATE audit SET code = ?, message = ?, "
                                     "run_id = ?, detail = ? WHERE id = ?"));
  upd.BindInt(1, e.code.value_or(0));
  upd.BindText(2, e.message);
  upd.BindIdOrNull(3, e.run_id);
  upd.BindText(4, e.detail);
  upd.BindInt(5, e.id);
  SKERRY_RETURN_IF_ERROR(upd.Run());
  if (w->Changes() != 1) {
    return absl::NotFoundError(
        absl::StrCat("audit entry ", e.id, " not found"));
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<AuditRecord>> AccessStore::QueryAudit(
    const AuditQuery& q) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(
                  "SELECT id, at_ms, principal, role, token_id, method, "
                  "run_id, peer, code, message, detail FROM audit WHERE "
                  "(?1 = 0 OR run_id = ?1) AND (?2 = '' OR principal = ?2) "
                  "AND (?3 = 0 OR id < ?3) ORDER BY id DESC LIMIT ?4"));
  s.BindInt(1, q.run_id);
  s.BindText(2, q.principal);
  s.BindInt(3, q.before_id);
  s.BindInt(4, q.limit);
  std::vector<AuditRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    AuditRecord e;
    e.id = s.ColumnInt(0);
    e.at_ms = s.ColumnInt(1);
    e.principal = s.ColumnText(2);
    e.role = static_cast<int32_t>(s.ColumnInt(3));
    e.token_id = s.ColumnIsNull(4) ? 0 : s.ColumnInt(4);
    e.method = s.ColumnText(5);
    e.run_id = s.ColumnIsNull(6) ? 0 : s.ColumnInt(6);
    e.peer = s.ColumnText(7);
    if (!s.ColumnIsNull(8)) e.code = static_cast<int32_t>(s.ColumnInt(8));
    e.message = s.ColumnText(9);
    e.detail = s.ColumnText(10);
    out.push_back(std::move(e));
  }
  return out;
}

absl::StatusOr<std::optional<std::string>> AccessStore::RunOwner(
    int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached("SELECT owner FROM runs WHERE id = ?"));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return std::optional<std::string>();
  return std::optional<std::string>(s.ColumnText(0));
}

}  // namespace skerry::store
