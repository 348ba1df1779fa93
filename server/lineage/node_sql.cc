#include "server/lineage/node_sql.h"

#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/row_sums.h"

namespace skerry::lineage::internal {

using skerry::v1::GenomeRef;
using skerry::v1::LineageNode;

NodeRow ReadRow(const store::Statement& s, int first) {
  NodeRow r;
  r.id = static_cast<uint64_t>(s.ColumnInt(first));
  r.run_id = static_cast<uint64_t>(s.ColumnInt(first + 1));
  r.island = static_cast<uint32_t>(s.ColumnInt(first + 2));
  r.generation = static_cast<uint32_t>(s.ColumnInt(first + 3));
  r.slot = static_cast<uint32_t>(s.ColumnInt(first + 4));
  r.origin = static_cast<skerry::v1::Origin>(s.ColumnInt(first + 5));
  // A NULL reads as 0, which is what "none" is.
  r.parent_a = static_cast<uint64_t>(s.ColumnInt(first + 6));
  r.parent_b = static_cast<uint64_t>(s.ColumnInt(first + 7));
  r.score = s.ColumnDouble(first + 8);
  r.state = static_cast<skerry::v1::EvalState>(s.ColumnInt(first + 9));
  return r;
}

NodeRow RowOf(const LineageNode& n) {
  NodeRow r;
  r.id = n.id();
  r.run_id = n.key().run_id();
  r.island = n.key().island();
  r.generation = n.key().generation();
  r.slot = n.key().slot();
  r.origin = n.origin();
  r.parent_a = n.parent_a();
  r.parent_b = n.parent_b();
  r.score = n.score();
  r.state = n.state();
  return r;
}

void ToNode(const NodeRow& r, LineageNode* out) {
  LineageNode& n = *out;
  n.set_id(r.id);
  skerry::v1::GenomeKey* key = n.mutable_key();
  key->set_run_id(r.run_id);
  key->set_island(r.island);
  key->set_generation(r.generation);
  key->set_slot(r.slot);
  n.set_origin(r.origin);
  n.set_parent_a(r.parent_a);
  n.set_parent_b(r.parent_b);
  n.set_score(r.score);
  n.set_state(r.state);
}

LineageNode ToNode(const NodeRow& r) {
  LineageNode n;
  ToNode(r, &n);
  return n;
}

LineageNode ReadNode(const store::Statement& s, int first) {
  LineageNode n;
  ReadNodeInto(s, &n, first);
  return n;
}

void ReadNodeInto(const store::Statement& s, LineageNode* out, int first) {
  ToNode(ReadRow(s, first), out);
}

std::string NodeName(const LineageNode& n) { return NodeName(RowOf(n)); }

std::string NodeName(const NodeRow& n) {
  return absl::StrCat("#", n.id, " ", n.run_id, "/", n.island, "/",
                      n.generation, "/", n.slot);
}

absl::StatusOr<NodeFetcher> NodeFetcher::Make(store::Connection* conn) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement stmt,
      conn->Prepare(absl::StrCat("SELECT ", kNodeColumns,
                                 " FROM genomes WHERE id = ?1 AND ",
                                 store::kGenomeChecked)));
  return NodeFetcher(std::move(stmt));
}

absl::StatusOr<std::optional<NodeRow>> NodeFetcher::GetRow(int64_t id) {
  stmt_.Reset();
  stmt_.BindInt(1, id);
  SKERRY_ASSIGN_OR_RETURN(bool row, stmt_.Step());
  if (!row) return std::optional<NodeRow>();
  return std::optional<NodeRow>(ReadRow(stmt_));
}

absl::StatusOr<NodeRow> NodeFetcher::RequireRow(int64_t id,
                                                const NodeRow* child) {
  SKERRY_ASSIGN_OR_RETURN(std::optional<NodeRow> row, GetRow(id));
  if (row.has_value()) return *row;
  if (child != nullptr) {
    return absl::DataLossError(absl::StrCat("genome ", NodeName(*child),
                                            ": parent #", id,
                                            " is not in the database"));
  }
  return absl::NotFoundError(absl::StrCat("no genome with id ", id));
}

absl::StatusOr<LineageNode> NodeFetcher::Require(int64_t id) {
  SKERRY_ASSIGN_OR_RETURN(NodeRow row, RequireRow(id));
  return ToNode(row);
}

namespace {

absl::StatusOr<LineageNode> ByKey(store::Connection* conn,
                                  const skerry::v1::GenomeKey& key) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement s,
      conn->Prepare(
          absl::StrCat("SELECT ", kNodeColumns,
                       " FROM genomes WHERE run_id = ?1 AND "
                       "island = ?2 AND generation = ?3 AND slot = ?4 AND ",
                       store::kGenomeChecked)));
  s.BindInt(1, static_cast<int64_t>(key.run_id()));
  s.BindInt(2, key.island());
  s.BindInt(3, key.generation());
  s.BindInt(4, key.slot());
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) {
    return absl::NotFoundError(absl::StrCat(
        "no genome ", key.run_id(), "/", key.island(), "/", key.generation(),
        "/", key.slot(), " (run/island/generation/slot)"));
  }
  return ReadNode(s);
}

absl::StatusOr<LineageNode> ChampionOf(store::Connection* conn,
                                       uint64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement s,
      conn->Prepare("SELECT champion_id FROM runs WHERE id = ?1"));
  s.BindInt(1, static_cast<int64_t>(run_id));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return absl::NotFoundError(absl::StrCat("no run ", run_id));
  if (s.ColumnIsNull(0)) {
    return absl::NotFoundError(
        absl::StrCat("run ", run_id, " has no champion yet"));
  }
  const int64_t id = s.ColumnInt(0);
  SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn));
  return fetch.Require(id);
}

}  // namespace

absl::StatusOr<LineageNode> ResolveRef(store::Connection* conn,
                                       const GenomeRef& ref) {
  switch (ref.ref_case()) {
    case GenomeRef::kId: {
      SKERRY_ASSIGN_OR_RETURN(NodeFetcher fetch, NodeFetcher::Make(conn));
      return fetch.Require(static_cast<int64_t>(ref.id()));
    }
    case GenomeRef::kKey:
      return ByKey(conn, ref.key());
    case GenomeRef::kChampionOfRun:
      return ChampionOf(conn, ref.champion_of_run());
    case GenomeRef::REF_NOT_SET:
      break;
  }
  return absl::InvalidArgumentError(
      "genome reference is empty: give an id, a natural key or a run's "
      "champion");
}

absl::StatusOr<skerry::v1::RunSpec> RunSpecOf(store::Connection* conn,
                                              uint64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(store::Statement s,
                          conn->Prepare("SELECT spec FROM runs WHERE id = ?1"));
  s.BindInt(1, static_cast<int64_t>(run_id));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row) return absl::NotFoundError(absl::StrCat("no run ", run_id));
  skerry::v1::RunSpec spec;
  if (!spec.ParseFromString(s.ColumnBlob(0))) {
    return absl::DataLossError(
        absl::StrCat("run ", run_id, ": stored spec does not parse"));
  }
  return spec;
}

absl::StatusOr<ReadTransaction> ReadTransaction::Begin(
    store::Connection* conn) {
  SKERRY_RETURN_IF_ERROR(conn->Exec("BEGIN"));
  return ReadTransaction(conn);
}

ReadTransaction::~ReadTransaction() {
  if (conn_ != nullptr) conn_->Exec("COMMIT").IgnoreError();
}

}  // namespace skerry::lineage::internal
