// The streamed lineage queries: ancestors (by the ancestry walk,
// ancestry_walk.h) and descendants (a recursive CTE over the parent_a and
// parent_b indexes). Both send the head first, then batches of nodes built on
// an arena.
#include <algorithm>
#include <functional>
#include <string>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "google/protobuf/arena.h"
#include "server/lineage/ancestry_walk.h"
#include "server/lineage/lineage_reader.h"
#include "server/lineage/node_sql.h"
#include "server/store/row_sums.h"

namespace skerry::lineage {
namespace {

using internal::kNodeColumns;
using internal::kNodeColumnsG;
using internal::NodeRow;
using internal::ReadTransaction;
using skerry::v1::LineageChunk;
using skerry::v1::LineageNode;

constexpr uint32_t kDefaultBatch = 1000;
constexpr uint32_t kMaxBatch = 10000;

// Descendants of ?1 no newer than generation ?2, through the parent_a and
// parent_b indexes. UNION (not UNION ALL) keeps one row per genome (every
// column is a function of the id): a genome reached twice is listed once.
std::string DescendantsSql() {
  return absl::StrCat(
      "WITH RECURSIVE d(", kNodeColumns, ") AS (SELECT ", kNodeColumns,
      " FROM genomes WHERE id = ?1 AND ", store::kGenomeChecked,
      " UNION SELECT ", kNodeColumnsG,
      " FROM d JOIN genomes g ON g.parent_a = d.id WHERE g.generation <= ?2 "
      "AND ",
      store::kGenomeCheckedG, " UNION SELECT ", kNodeColumnsG,
      " FROM d JOIN genomes g ON g.parent_b = d.id WHERE g.generation <= ?2 "
      "AND ",
      store::kGenomeCheckedG,
      ") "
      "SELECT ",
      kNodeColumns, " FROM d");
}

// Genomes the run holds per generation, by its spec (every island's
// population).
absl::StatusOr<uint64_t> GenomesPerGeneration(store::Connection* conn,
                                              uint64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(skerry::v1::RunSpec spec,
                          internal::RunSpecOf(conn, run_id));
  uint64_t total = 0;
  const uint32_t islands = std::max<uint32_t>(1, spec.islands().count());
  for (uint32_t i = 0; i < islands; ++i) total += IslandPopulation(spec, i);
  return total;
}

// The newest generation of the run and of its forks, and theirs: a genome's
// descendants may live on in a fork that went further than its own run.
absl::StatusOr<uint32_t> NewestGeneration(store::Connection* conn,
                                          uint64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement s,
      conn->Prepare("WITH RECURSIVE line(id) AS (SELECT ?1 UNION SELECT r.id "
                    "FROM runs r JOIN line ON r.parent_run = line.id) SELECT "
                    "max(generation) FROM islands WHERE run_id IN line"));
  s.BindInt(1, static_cast<int64_t>(run_id));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row || s.ColumnIsNull(0)) return 0u;
  return static_cast<uint32_t>(s.ColumnInt(0));
}

// The generation bound of a streamed query: the oldest generation of an
// ancestry, the newest of a descent. The genome's own generation: nothing.
using Reach = std::function<absl::StatusOr<uint32_t>(
    store::Connection* conn, const LineageNode& genome)>;

// Resolves the genome, bounds the query and sends the head (at_most: every
// genome the run holds between the genome's generation and the bound).
absl::StatusOr<LineageReader::StreamHead> SendHead(
    store::Connection* conn, const skerry::v1::GenomeRef& ref,
    const Reach& reach,
    const std::function<bool(const LineageReader::StreamHead&)>& on_head,
    uint32_t* bound) {
  LineageReader::StreamHead head;
  SKERRY_ASSIGN_OR_RETURN(head.genome, internal::ResolveRef(conn, ref));
  const uint32_t gen = head.genome.key().generation();
  SKERRY_ASSIGN_OR_RETURN(*bound, reach(conn, head.genome));
  SKERRY_ASSIGN_OR_RETURN(
      uint64_t per_gen, GenomesPerGeneration(conn, head.genome.key().run_id()));
  head.at_most = per_gen * (*bound > gen ? *bound - gen : gen - *bound);
  if (!on_head(head)) return absl::CancelledError("stopped by the reader");
  return head;
}

// Hands rows to the sink in batches. Nodes are built on an arena, reset
// after each batch: no allocation per node.
class ChunkStream {
 public:
  ChunkStream(uint32_t batch_size, const LineageReader::BatchSink& sink)
      : batch_size_(batch_size == 0 ? kDefaultBatch
                                    : std::min(batch_size, kMaxBatch)),
        sink_(sink),
        arena_(Options()),
        chunk_(NewChunk()) {}

  absl::Status Add(const NodeRow& row) {
    internal::ToNode(row, chunk_->add_nodes());
    if (static_cast<uint32_t>(chunk_->nodes_size()) < batch_size_) {
      return absl::OkStatus();
    }
    if (!sink_(*chunk_)) return absl::CancelledError("stopped by the reader");
    arena_.Reset();
    chunk_ = NewChunk();
    return absl::OkStatus();
  }
  absl::Status Finish() {
    if (chunk_->nodes_size() > 0 && !sink_(*chunk_)) {
      return absl::CancelledError("stopped by the reader");
    }
    return absl::OkStatus();
  }

 private:
  static google::protobuf::ArenaOptions Options() {
    google::protobuf::ArenaOptions options;
    options.start_block_size = 64 << 10;
    options.max_block_size = 1 << 20;
    return options;
  }
  LineageChunk* NewChunk() {
    return google::protobuf::Arena::CreateMessage<LineageChunk>(&arena_);
  }

  const uint32_t batch_size_;
  const LineageReader::BatchSink& sink_;
  google::protobuf::Arena arena_;
  LineageChunk* chunk_;
};

}  // namespace

absl::Status LineageReader::Ancestors(
    const skerry::v1::AncestorsRequest& request,
    const std::function<bool(const StreamHead&)>& on_head,
    const BatchSink& on_batch) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  // The oldest generation asked for.
  auto oldest_of = [&request](
                       store::Connection*,
                       const LineageNode& genome) -> absl::StatusOr<uint32_t> {
    const uint32_t gen = genome.key().generation();
    uint32_t bound = std::min(request.min_generation(), gen);
    if (request.max_depth() > 0 && request.max_depth() < gen) {
      bound = std::max(bound, gen - request.max_depth());
    }
    return bound;
  };
  uint32_t oldest = 0;
  SKERRY_ASSIGN_OR_RETURN(
      StreamHead head,
      SendHead(conn.get(), request.genome(), oldest_of, on_head, &oldest));
  SKERRY_ASSIGN_OR_RETURN(
      internal::AncestryWalk walk,
      internal::AncestryWalk::Make(
          conn.get(), internal::AncestryWalk::Columns::kNodes, oldest));
  walk.Start(0, internal::RowOf(head.genome));
  ChunkStream out(request.batch_size(), on_batch);
  // Newest generation first; the genome's own is not in the answer.
  SKERRY_RETURN_IF_ERROR(walk.Expand(head.genome.key().generation()));
  // Bounded: each round expands one generation, older than the last.
  while (!walk.empty(0)) {
    const uint32_t g = walk.Newest(0);
    for (const NodeRow& row : walk.NewestGenomes(0)) {
      SKERRY_RETURN_IF_ERROR(out.Add(row));
    }
    SKERRY_RETURN_IF_ERROR(walk.Expand(g));
  }
  return out.Finish();
}

absl::Status LineageReader::Descendants(
    const skerry::v1::DescendantsRequest& request,
    const std::function<bool(const StreamHead&)>& on_head,
    const BatchSink& on_batch) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  // The newest generation asked for that the run has reached.
  auto newest_of = [&request](
                       store::Connection* c,
                       const LineageNode& genome) -> absl::StatusOr<uint32_t> {
    const uint32_t gen = genome.key().generation();
    SKERRY_ASSIGN_OR_RETURN(uint32_t bound,
                            NewestGeneration(c, genome.key().run_id()));
    bound = std::max(bound, gen);
    if (request.max_depth() > 0) {
      bound = static_cast<uint32_t>(
          std::min<uint64_t>(bound, uint64_t{gen} + request.max_depth()));
    }
    return bound;
  };
  uint32_t newest = 0;
  SKERRY_ASSIGN_OR_RETURN(
      StreamHead head,
      SendHead(conn.get(), request.genome(), newest_of, on_head, &newest));
  if (newest == head.genome.key().generation()) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(store::Statement stmt,
                          conn->Prepare(DescendantsSql()));
  stmt.BindInt(1, static_cast<int64_t>(head.genome.id()));
  stmt.BindInt(2, newest);
  ChunkStream out(request.batch_size(), on_batch);
  for (;;) {
    SKERRY_ASSIGN_OR_RETURN(bool row, stmt.Step());
    if (!row) break;
    const NodeRow node = internal::ReadRow(stmt);
    if (node.id != head.genome.id()) SKERRY_RETURN_IF_ERROR(out.Add(node));
  }
  return out.Finish();
}

}  // namespace skerry::lineage
