// LineageReader: the lineage queries (proto/skerry/v1/lineage.proto) over the
// store's genomes table, on read-only SQLite connections of its own.
//
// Ancestors, coalescence and the common ancestor walk the ancestry one
// generation at a time, reading each generation's parents as rowid ranges
// (ancestry_walk.h); descendants are a recursive CTE over the partial indexes
// on parent_a and parent_b (schema version 2); the line of descent looks each
// parent up by primary key. So a query costs in proportion to its answer, not
// to the table. A genome reached twice (a diamond) is listed once. Depth is
// counted in generations (see lineage.proto); every bound is applied while
// walking, so nothing past it is expanded.
//
// Readers never block the coordinator's writer: the database is in WAL mode and
// each query runs in one read transaction on its own connection (a long stream
// holds its snapshot, and the WAL cannot be checkpointed past it meanwhile).
//
// Invariant: the reader never writes; every answer is one consistent snapshot.
// Thread safety: every method may be called from any thread at once; each call
// takes a connection of its own from a small pool.
#ifndef SKERRY_SERVER_LINEAGE_LINEAGE_READER_H_
#define SKERRY_SERVER_LINEAGE_LINEAGE_READER_H_

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "server/store/sqlite.h"
#include "skerry/v1/lineage.pb.h"

namespace skerry::lineage {

struct ReaderOptions {
  // Page cache per connection, in KiB. Memory stays flat in history size:
  // at most max_idle_connections caches are kept between calls.
  int cache_kib = 16384;
  int max_idle_connections = 4;
  // The common-ancestor search gives up (ResourceExhausted) after reading this
  // many genomes.
  uint64_t max_visited = 5'000'000;
};

class LineageReader {
 public:
  // Opens a first connection to check the file is there and has a genomes
  // table; NotFound / FailedPrecondition name the path.
  static absl::StatusOr<std::unique_ptr<LineageReader>> Open(
      const std::string& db_path, ReaderOptions options = {});

  // The genome a reference names. NotFound says which reference.
  absl::StatusOr<skerry::v1::LineageNode> Resolve(
      const skerry::v1::GenomeRef& ref);

  // Receives each batch of nodes in chunk.nodes() (the chunk lives on an arena
  // that is reset after the call; the sink may add fields before sending it
  // on); returns false to stop early (the query then ends with Cancelled).
  using BatchSink = std::function<bool(skerry::v1::LineageChunk& chunk)>;

  struct StreamHead {
    skerry::v1::LineageNode genome;
    uint64_t at_most = 0;
  };
  // Calls `on_head` once, then `on_batch` with batches of up to `batch_size`
  // ancestors, newest generation first and by id within a generation.
  absl::Status Ancestors(const skerry::v1::AncestorsRequest& request,
                         const std::function<bool(const StreamHead&)>& on_head,
                         const BatchSink& on_batch);
  // Descendants, oldest generation first.
  absl::Status Descendants(
      const skerry::v1::DescendantsRequest& request,
      const std::function<bool(const StreamHead&)>& on_head,
      const BatchSink& on_batch);

  absl::StatusOr<skerry::v1::LineOfDescentResponse> LineOfDescent(
      const skerry::v1::GenomeRef& ref);
  absl::StatusOr<skerry::v1::CommonAncestorResponse> CommonAncestor(
      const skerry::v1::GenomeRef& a, const skerry::v1::GenomeRef& b);
  absl::StatusOr<skerry::v1::CoalescenceResponse> Coalescence(
      const skerry::v1::CoalescenceRequest& request);
  absl::StatusOr<skerry::v1::AttributionResponse> Attribution(
      const skerry::v1::GenomeRef& ref);

  // The rule the line of descent follows, in words.
  static const char* DescentRule();

 private:
  // A connection from the pool, given back when it goes out of scope.
  using Pooled = std::unique_ptr<store::Connection,
                                 std::function<void(store::Connection*)>>;

  LineageReader(std::string path, ReaderOptions options)
      : path_(std::move(path)), options_(options) {}
  absl::StatusOr<std::unique_ptr<store::Connection>> Connect();
  absl::StatusOr<Pooled> Borrow();
  void GiveBack(store::Connection* conn);

  const std::string path_;
  const ReaderOptions options_;

  absl::Mutex mu_;
  std::vector<std::unique_ptr<store::Connection>> idle_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry::lineage

#endif  // SKERRY_SERVER_LINEAGE_LINEAGE_READER_H_
