// ReadPool: read-only SQLite connections beside the store's one writer, so
// that reads (list, show, history, digest, the engine's restart reads) never
// wait for the writer's mutex, and a long read never delays a result commit.
//
// Why this holds: the database is in WAL mode. A reader reads the pages of the
// snapshot it began on, from the database file and the log; the writer only
// appends to the log. Neither takes a lock the other waits for (SQLite's
// wal.c, "readers and writers do not block each other"). The one thing a
// long reader holds up is a checkpoint past its snapshot: the log grows
// meanwhile, and is checkpointed when the reader ends.
//
// Each Lease is one read transaction: Acquire() begins it and reads the
// schema_version table, so every query made through the lease sees one
// snapshot, the newest commit at that moment. It ends when the lease goes
// away. Connections are opened SQLITE_OPEN_READONLY, with the skerry_row_sum
// function (so the reads check row checksums as the writer's did) and a
// statement cache each (Connection::PrepareCached).
//
// Invariant: a connection is lent to one Lease at a time; idle connections
// hold no read transaction; at most max_idle connections are kept idle.
// Thread safety: every method may be called from any thread at once; a Lease
// is used by one thread at a time.
#ifndef SKERRY_SERVER_STORE_READ_POOL_H_
#define SKERRY_SERVER_STORE_READ_POOL_H_

#include <functional>
#include <memory>
#include <set>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "server/store/sqlite.h"

namespace skerry::store {

class ReadPool {
 public:
  struct Options {
    std::string vfs;  // SQLite VFS name; empty: the default
    int busy_timeout_ms = 5000;
    int max_idle = 4;
    // Page cache per connection, in KiB (SQLite's default is 2 MiB).
    int cache_kib = 8192;
  };
  // Opens nothing yet: connections are opened on demand.
  ReadPool(std::string path, Options options)
      : path_(std::move(path)), options_(std::move(options)) {}
  ~ReadPool();
  ReadPool(const ReadPool&) = delete;
  ReadPool& operator=(const ReadPool&) = delete;

  // One read transaction on a connection of its own; ends when destroyed.
  class Lease {
   public:
    Lease(Lease&& other) noexcept
        : pool_(other.pool_), conn_(std::move(other.conn_)) {
      other.pool_ = nullptr;
    }
    Lease& operator=(Lease&&) = delete;
    Lease(const Lease&) = delete;
    ~Lease();
    Connection* operator->() const { return conn_.get(); }
    Connection* get() const { return conn_.get(); }

   private:
    friend class ReadPool;
    Lease(ReadPool* pool, std::unique_ptr<Connection> conn)
        : pool_(pool), conn_(std::move(conn)) {}
    ReadPool* pool_;
    std::unique_ptr<Connection> conn_;
  };
  // Unavailable when a connection cannot be opened or the snapshot cannot
  // be taken (names the path).
  absl::StatusOr<Lease> Acquire();

  // Makes every read running now fail soon (sqlite3_interrupt), for a
  // bounded shutdown. Any thread.
  void Interrupt();

  // Called by Acquire once the lease's snapshot is taken, before it returns:
  // tests hold a read open across a commit with it. Empty: none.
  void SetSnapshotHookForTest(std::function<void()> hook);

 private:
  void Return(std::unique_ptr<Connection> conn);
  absl::StatusOr<std::unique_ptr<Connection>> OpenOne();
  void Forget(sqlite3* db);

  const std::string path_;
  const Options options_;
  absl::Mutex mu_;
  std::vector<std::unique_ptr<Connection>> idle_ ABSL_GUARDED_BY(mu_);
  std::set<sqlite3*> open_ ABSL_GUARDED_BY(mu_);  // for Interrupt
  std::function<void()> snapshot_hook_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_READ_POOL_H_
