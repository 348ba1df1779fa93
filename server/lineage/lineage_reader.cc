// The connection pool, reference resolution, and the set-valued queries
// (ancestors, descendants, coalescence). The chain-valued ones (line of
// descent, attribution, common ancestor) are in descent.cc.
#include "server/lineage/lineage_reader.h"

#include <algorithm>
#include <map>
#include <set>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "google/protobuf/arena.h"
#include "server/lineage/node_sql.h"

namespace skerry::lineage {
namespace {

using internal::kNodeColumns;
using internal::kNodeColumnsG;
using internal::ReadTransaction;
using skerry::v1::LineageChunk;
using skerry::v1::LineageNode;

constexpr uint32_t kDefaultBatch = 1000;
constexpr uint32_t kMaxBatch = 10000;

uint32_t BatchSize(uint32_t asked) {
  if (asked == 0) return kDefaultBatch;
  return std::min(asked, kMaxBatch);
}

// Ancestors of the genome ?1 no older than generation ?2, the genome itself
// first. Each parent is found by primary key; UNION keeps one row per genome
// (every column is a function of the id).
std::string AncestorsSql() {
  return absl::StrCat("WITH RECURSIVE anc(", kNodeColumns, ") AS (SELECT ",
                      kNodeColumns, " FROM genomes WHERE id = ?1 UNION SELECT ",
                      kNodeColumnsG,
                      " FROM anc JOIN genomes g ON g.id IN (anc.parent_a, "
                      "anc.parent_b) WHERE g.generation >= ?2) SELECT ",
                      kNodeColumns, " FROM anc");
}

// Descendants of ?1 no newer than generation ?2, through the parent_a and
// parent_b indexes.
std::string DescendantsSql() {
  return absl::StrCat(
      "WITH RECURSIVE d(", kNodeColumns, ") AS (SELECT ", kNodeColumns,
      " FROM genomes WHERE id = ?1 UNION SELECT ", kNodeColumnsG,
      " FROM d JOIN genomes g ON g.parent_a = d.id WHERE g.generation <= ?2 "
      "UNION SELECT ",
      kNodeColumnsG,
      " FROM d JOIN genomes g ON g.parent_b = d.id WHERE g.generation <= ?2) "
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

absl::StatusOr<uint32_t> NewestGeneration(store::Connection* conn,
                                          uint64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement s,
      conn->Prepare("SELECT max(generation) FROM islands WHERE run_id = ?1"));
  s.BindInt(1, static_cast<int64_t>(run_id));
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  if (!row || s.ColumnIsNull(0)) return 0u;
  return static_cast<uint32_t>(s.ColumnInt(0));
}

// Steps `stmt` to the end, handing every row but `skip_id` to `sink` in
// batches.
absl::Status StreamRows(store::Statement& stmt, uint64_t skip_id,
                        uint32_t batch_size,
                        const LineageReader::BatchSink& sink) {
  // Nodes are built on an arena, reset after each batch: no allocation per
  // node, which keeps the service within a small factor of the bare query.
  google::protobuf::ArenaOptions options;
  options.start_block_size = 64 << 10;
  options.max_block_size = 1 << 20;
  google::protobuf::Arena arena(options);
  auto* chunk = google::protobuf::Arena::CreateMessage<LineageChunk>(&arena);
  for (;;) {
    SKERRY_ASSIGN_OR_RETURN(bool row, stmt.Step());
    if (!row) break;
    if (static_cast<uint64_t>(stmt.ColumnInt(0)) == skip_id) continue;
    internal::ReadNodeInto(stmt, chunk->add_nodes());
    if (static_cast<uint32_t>(chunk->nodes_size()) >= batch_size) {
      if (!sink(*chunk)) return absl::CancelledError("stopped by the reader");
      arena.Reset();
      chunk = google::protobuf::Arena::CreateMessage<LineageChunk>(&arena);
    }
  }
  if (chunk->nodes_size() > 0 && !sink(*chunk)) {
    return absl::CancelledError("stopped by the reader");
  }
  return absl::OkStatus();
}

}  // namespace

const char* LineageReader::DescentRule() {
  return "through the fitter parent: a scored parent beats a failed one, the "
         "better score under the run's objective wins, ties and single-parent "
         "genomes go to parent a; the line ends at generation 0 or at an "
         "immigrant";
}

absl::StatusOr<std::unique_ptr<LineageReader>> LineageReader::Open(
    const std::string& db_path, ReaderOptions options) {
  std::unique_ptr<LineageReader> reader(new LineageReader(db_path, options));
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::Connection> conn,
                          reader->Connect());
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement probe,
      conn->Prepare("SELECT count(*) FROM sqlite_master WHERE type = 'table' "
                    "AND name = 'genomes'"));
  SKERRY_ASSIGN_OR_RETURN(bool row, probe.Step());
  if (!row || probe.ColumnInt(0) == 0) {
    return absl::FailedPreconditionError(
        absl::StrCat(db_path, ": not a Skerry database (no genomes table)"));
  }
  probe = store::Statement();
  reader->GiveBack(conn.release());
  return reader;
}

absl::StatusOr<std::unique_ptr<store::Connection>> LineageReader::Connect() {
  absl::StatusOr<std::unique_ptr<store::Connection>> conn =
      store::Connection::Open(path_,
                              SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX);
  if (!conn.ok()) {
    return absl::Status(
        conn.status().code(),
        absl::StrCat("lineage reader: ", conn.status().message()));
  }
  sqlite3_busy_timeout((*conn)->raw(), 5000);
  SKERRY_RETURN_IF_ERROR((*conn)->Exec(
      absl::StrCat("PRAGMA cache_size=-", options_.cache_kib,
                   "; PRAGMA query_only=1; PRAGMA temp_store=FILE")));
  return conn;
}

absl::StatusOr<LineageReader::Pooled> LineageReader::Borrow() {
  store::Connection* conn = nullptr;
  {
    absl::MutexLock l(&mu_);
    if (!idle_.empty()) {
      conn = idle_.back().release();
      idle_.pop_back();
    }
  }
  if (conn == nullptr) {
    SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::Connection> fresh,
                            Connect());
    conn = fresh.release();
  }
  return Pooled(conn, [this](store::Connection* c) { GiveBack(c); });
}

void LineageReader::GiveBack(store::Connection* conn) {
  std::unique_ptr<store::Connection> owned(conn);
  // A connection left inside a transaction (an error mid-query) is dropped.
  if (!sqlite3_get_autocommit(conn->raw())) return;
  absl::MutexLock l(&mu_);
  if (static_cast<int>(idle_.size()) < options_.max_idle_connections) {
    idle_.push_back(std::move(owned));
  }
}

absl::StatusOr<LineageNode> LineageReader::Resolve(
    const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  return internal::ResolveRef(conn.get(), ref);
}

absl::Status LineageReader::StreamQuery(
    const skerry::v1::GenomeRef& ref, uint32_t batch_size, const Reach& reach,
    const std::string& sql,
    const std::function<bool(const StreamHead&)>& on_head,
    const BatchSink& on_batch) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  StreamHead head;
  SKERRY_ASSIGN_OR_RETURN(head.genome, internal::ResolveRef(conn.get(), ref));
  const uint32_t gen = head.genome.key().generation();
  SKERRY_ASSIGN_OR_RETURN(const uint32_t bound, reach(conn.get(), head.genome));
  SKERRY_ASSIGN_OR_RETURN(
      uint64_t per_gen,
      GenomesPerGeneration(conn.get(), head.genome.key().run_id()));
  head.at_most = per_gen * (bound > gen ? bound - gen : gen - bound);
  if (!on_head(head)) return absl::CancelledError("stopped by the reader");
  if (bound == gen) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(store::Statement stmt, conn->Prepare(sql));
  stmt.BindInt(1, static_cast<int64_t>(head.genome.id()));
  stmt.BindInt(2, bound);
  return StreamRows(stmt, head.genome.id(), BatchSize(batch_size), on_batch);
}

absl::Status LineageReader::Ancestors(
    const skerry::v1::AncestorsRequest& request,
    const std::function<bool(const StreamHead&)>& on_head,
    const BatchSink& on_batch) {
  // The oldest generation asked for.
  auto oldest = [&request](
                    store::Connection*,
                    const LineageNode& genome) -> absl::StatusOr<uint32_t> {
    const uint32_t gen = genome.key().generation();
    uint32_t bound = std::min(request.min_generation(), gen);
    if (request.max_depth() > 0 && request.max_depth() < gen) {
      bound = std::max(bound, gen - request.max_depth());
    }
    return bound;
  };
  return StreamQuery(request.genome(), request.batch_size(), oldest,
                     AncestorsSql(), on_head, on_batch);
}

absl::Status LineageReader::Descendants(
    const skerry::v1::DescendantsRequest& request,
    const std::function<bool(const StreamHead&)>& on_head,
    const BatchSink& on_batch) {
  // The newest generation asked for that the run has reached.
  auto newest = [&request](
                    store::Connection* conn,
                    const LineageNode& genome) -> absl::StatusOr<uint32_t> {
    const uint32_t gen = genome.key().generation();
    SKERRY_ASSIGN_OR_RETURN(uint32_t bound,
                            NewestGeneration(conn, genome.key().run_id()));
    bound = std::max(bound, gen);
    if (request.max_depth() > 0) {
      bound = static_cast<uint32_t>(
          std::min<uint64_t>(bound, uint64_t{gen} + request.max_depth()));
    }
    return bound;
  };
  return StreamQuery(request.genome(), request.batch_size(), newest,
                     DescendantsSql(), on_head, on_batch);
}

namespace {

// The starting genomes of a coalescence query, as the first SELECT of the CTE.
struct CoalescenceStart {
  std::string seed_sql;  // binds ?1 and, for populations, ?3 / ?4
  uint64_t run_id = 0;
  uint32_t generation = 0;
};

absl::StatusOr<CoalescenceStart> StartOf(
    store::Connection* conn, const skerry::v1::CoalescenceRequest& request) {
  CoalescenceStart start;
  constexpr char kCols[] = "id, island, generation, parent_a, parent_b";
  if (request.has_genome()) {
    SKERRY_ASSIGN_OR_RETURN(LineageNode n,
                            internal::ResolveRef(conn, request.genome()));
    start.run_id = n.key().run_id();
    start.generation = n.key().generation();
    start.seed_sql =
        absl::StrCat("SELECT ", kCols, " FROM genomes WHERE id = ", n.id());
    return start;
  }
  if (!request.has_population()) {
    return absl::InvalidArgumentError(
        "coalescence: give a genome or a population (run, generation, island)");
  }
  const skerry::v1::PopulationRef& p = request.population();
  start.run_id = p.run_id();
  start.generation = p.generation();
  // The natural-key index leads with (run_id, island): list the islands so
  // that each is one index range.
  std::string islands =
      p.all_islands()
          ? absl::StrCat("SELECT idx FROM islands WHERE run_id = ", p.run_id())
          : absl::StrCat(p.island());
  start.seed_sql = absl::StrCat(
      "SELECT ", kCols, " FROM genomes WHERE run_id = ", p.run_id(),
      " AND island IN (", islands, ") AND generation = ", p.generation());
  return start;
}

}  // namespace

absl::StatusOr<skerry::v1::CoalescenceResponse> LineageReader::Coalescence(
    const skerry::v1::CoalescenceRequest& request) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  SKERRY_ASSIGN_OR_RETURN(ReadTransaction txn,
                          ReadTransaction::Begin(conn.get()));
  SKERRY_ASSIGN_OR_RETURN(CoalescenceStart start, StartOf(conn.get(), request));
  uint32_t oldest = 0;
  if (request.max_depth() > 0 && request.max_depth() < start.generation) {
    oldest = start.generation - request.max_depth();
  }
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement stmt,
      conn->Prepare(absl::StrCat(
          "WITH RECURSIVE anc(id, island, generation, parent_a, parent_b) AS (",
          start.seed_sql,
          " UNION SELECT g.id, g.island, g.generation, g.parent_a, g.parent_b "
          "FROM anc JOIN genomes g ON g.id IN (anc.parent_a, anc.parent_b) "
          "WHERE g.generation >= ?1) SELECT island, generation FROM anc")));
  stmt.BindInt(1, oldest);
  struct Level {
    uint64_t count = 0;
    std::set<uint32_t> islands;
  };
  std::map<uint32_t, Level, std::greater<uint32_t>> levels;
  for (;;) {
    SKERRY_ASSIGN_OR_RETURN(bool row, stmt.Step());
    if (!row) break;
    Level& level = levels[static_cast<uint32_t>(stmt.ColumnInt(1))];
    ++level.count;
    level.islands.insert(static_cast<uint32_t>(stmt.ColumnInt(0)));
  }
  if (levels.empty()) {
    const skerry::v1::PopulationRef& p = request.population();
    return absl::NotFoundError(absl::StrCat(
        "run ", p.run_id(), " has no genomes in generation ", p.generation(),
        p.all_islands() ? "" : absl::StrCat(" of island ", p.island())));
  }
  skerry::v1::CoalescenceResponse out;
  out.set_run_id(start.run_id);
  out.set_generation(start.generation);
  for (const auto& [generation, level] : levels) {
    skerry::v1::CoalescenceLevel* l = out.add_levels();
    l->set_generation(generation);
    l->set_ancestors(level.count);
    l->set_islands(static_cast<uint32_t>(level.islands.size()));
  }
  return out;
}

}  // namespace skerry::lineage
