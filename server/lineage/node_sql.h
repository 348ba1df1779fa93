// Internal to server/lineage: the SQL shared by the lineage queries. Reading a
// genome row as a LineageNode, looking genomes up by id, resolving references,
// the run's objective, and a read transaction (one snapshot per answer).
//
// Thread safety: none; each helper works on the one connection it is given.
#ifndef SKERRY_SERVER_LINEAGE_NODE_SQL_H_
#define SKERRY_SERVER_LINEAGE_NODE_SQL_H_

#include <cstdint>
#include <optional>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "server/store/sqlite.h"
#include "skerry/v1/lineage.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::lineage::internal {

// The columns ReadNode expects, in order, starting at its `first` column.
inline constexpr char kNodeColumns[] =
    "id, run_id, island, generation, slot, origin, parent_a, parent_b, score, "
    "eval_state";
// The same columns qualified by a table alias "g.".
inline constexpr char kNodeColumnsG[] =
    "g.id, g.run_id, g.island, g.generation, g.slot, g.origin, g.parent_a, "
    "g.parent_b, g.score, g.eval_state";

// A row of kNodeColumns as plain values: what a query looks at before (or
// instead of) making a LineageNode of it, at no allocation.
struct NodeRow {
  uint64_t id = 0;
  uint64_t run_id = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  uint32_t slot = 0;
  skerry::v1::Origin origin = skerry::v1::ORIGIN_UNSPECIFIED;
  uint64_t parent_a = 0;  // 0: none
  uint64_t parent_b = 0;
  double score = 0;  // meaningful when scored()
  skerry::v1::EvalState state = skerry::v1::EVAL_STATE_UNSPECIFIED;

  // True when the genome has a usable score (EVALUATED).
  bool scored() const { return state == skerry::v1::EVALUATED; }
};

NodeRow ReadRow(const store::Statement& s, int first = 0);
NodeRow RowOf(const skerry::v1::LineageNode& n);
// Fills an existing (cleared) node, e.g. one on an arena.
void ToNode(const NodeRow& row, skerry::v1::LineageNode* n);
skerry::v1::LineageNode ToNode(const NodeRow& row);

skerry::v1::LineageNode ReadNode(const store::Statement& s, int first = 0);
// The same into an existing (cleared) node, e.g. one on an arena.
void ReadNodeInto(const store::Statement& s, skerry::v1::LineageNode* n,
                  int first = 0);

// "#ID R/I/G/S": how messages name a genome.
std::string NodeName(const skerry::v1::LineageNode& n);
std::string NodeName(const NodeRow& n);

// Looks genomes up by primary key with one prepared statement.
class NodeFetcher {
 public:
  static absl::StatusOr<NodeFetcher> Make(store::Connection* conn);
  // std::nullopt when no genome has that id.
  absl::StatusOr<std::optional<NodeRow>> GetRow(int64_t id);
  // NotFound (DataLoss when `child` is given: a dangling parent link).
  absl::StatusOr<NodeRow> RequireRow(int64_t id,
                                     const NodeRow* child = nullptr);
  // NotFound when no genome has that id.
  absl::StatusOr<skerry::v1::LineageNode> Require(int64_t id);

 private:
  explicit NodeFetcher(store::Statement stmt) : stmt_(std::move(stmt)) {}
  store::Statement stmt_;
};

absl::StatusOr<skerry::v1::LineageNode> ResolveRef(
    store::Connection* conn, const skerry::v1::GenomeRef& ref);

// The run's spec as stored (for its objective and island populations).
absl::StatusOr<skerry::v1::RunSpec> RunSpecOf(store::Connection* conn,
                                              uint64_t run_id);

// True when score `a` is strictly better than `b` under `objective`
// (MINIMIZE unless MAXIMIZE, as the spec is normalised).
inline bool Better(skerry::v1::Objective objective, double a, double b) {
  return objective == skerry::v1::MAXIMIZE ? a > b : a < b;
}

// BEGIN (deferred) ... COMMIT: every statement in between reads one snapshot.
class ReadTransaction {
 public:
  static absl::StatusOr<ReadTransaction> Begin(store::Connection* conn);
  ReadTransaction(ReadTransaction&& other) noexcept : conn_(other.conn_) {
    other.conn_ = nullptr;
  }
  ReadTransaction(const ReadTransaction&) = delete;
  ReadTransaction& operator=(const ReadTransaction&) = delete;
  ~ReadTransaction();

 private:
  explicit ReadTransaction(store::Connection* conn) : conn_(conn) {}
  store::Connection* conn_;
};

}  // namespace skerry::lineage::internal

#endif  // SKERRY_SERVER_LINEAGE_NODE_SQL_H_
