// The database layer under the stores: one SQLite file, its schema and
// migrations, its one writer connection and its read-only connections.
// Every store (store.h lists them) reaches the file through a Database and
// through nothing else.
//
// What it gives:
// - Write(): the writer connection, held by one thread at a time for as long
//   as the returned Writer lives. Every write transaction of every store runs
//   on it, so the stores' commit points are serialised with each other, as
//   SQLite's one writer would serialise them anyway. A function that takes a
//   `Writer&` may only be called with the writer held: it is how one store
//   writes its rows inside another store's transaction (a run's generation 0
//   inside CreateRun, say).
// - Reader(): a read transaction on a connection of the read pool
//   (read_pool.h), one snapshot of the newest commit, beside the writer.
// - Open, the checks at start and while serving, StopWrites, and the id
//   policy shared by the stores that give ids (LargestId, RaiseIdFloors).
//
// ## Pragmas
//   journal_mode=WAL   readers (the read pool's own connections) never block
//                      the writer, and one writer commit is one append to
//                      the log
//   synchronous=FULL   the WAL is synced at every commit: an acknowledged
//                      result survives power loss, not only a process crash.
//                      Group commit makes this cheap per result.
//                      RunStore::CommitGeneration alone runs with
//                      synchronous=NORMAL: nobody is answered on it, it can be
//                      bred again from the generation before, and the WAL is
//                      synced in order, so the next synced commit (the first
//                      result of that generation, say) makes it durable too.
//   busy_timeout=5000  a backup or a second reader may hold a lock briefly
//   foreign_keys=OFF   parent links are checked by `--check`, not per insert
//   auto_vacuum=INCREMENTAL  set when a database is created (it cannot be
//                      set later without a VACUUM): RunStore::DeleteRun gives
//                      the freed pages back with `PRAGMA incremental_vacuum`
//
// A database written by a newer schema than kSchemaVersion is refused, naming
// both versions; an older one is migrated forward in one transaction. The
// schema itself is described in store.h.
//
// Invariant: the writer connection is used only through a Writer; the read
// pool's connections only read.
// Thread safety: every method may be called from any thread. A Writer is used
// by the thread that took it.
#ifndef SKERRY_SERVER_STORE_DATABASE_H_
#define SKERRY_SERVER_STORE_DATABASE_H_

#include <cstdint>
#include <memory>
#include <string>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "server/store/read_pool.h"
#include "server/store/sqlite.h"

namespace skerry::store {

// What Database::Open and `--check` say of a 0-byte file.
inline constexpr const char* kEmptyFileMessage =
    "not a Skerry database: the file is empty (0 bytes). Only a file that does "
    "not exist yet becomes a new database; remove the empty file to start one";

class Database {
 public:
  static constexpr int kSchemaVersion = 13;

  struct Options {
    std::string vfs;  // SQLite VFS name of the writer; empty: the default
    int busy_timeout_ms = 5000;
    // The caller made the empty file itself a moment ago (OwnerLock does,
    // to lock it): initialise it as if it had been absent.
    bool initialise_empty_file = false;
    // `--read-only`: SQLITE_OPEN_READONLY, no pragma set, no migration. The
    // file must exist and be at this program's schema version exactly
    // (FailedPrecondition otherwise, naming both versions).
    bool read_only = false;
  };
  // Opens the database at `path`, applies the pragmas and migrates an older
  // schema. Only a file that does not exist is created (and initialised); an
  // empty file or one without Skerry's schema is refused, unchanged
  // (FailedPrecondition), as is a newer schema.
  static absl::StatusOr<std::unique_ptr<Database>> Open(const std::string& path,
                                                        const Options& options);

  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;

  // The writer connection, held from Write() until the Writer is destroyed.
  // Not movable: it lives in the scope that took it.
  class Writer {
   public:
    ~Writer();
    Writer(const Writer&) = delete;
    Writer& operator=(const Writer&) = delete;
    Connection* conn() const { return conn_; }
    Connection* operator->() const { return conn_; }
    Database& db() const { return *db_; }

   private:
    friend class Database;
    explicit Writer(Database* db);
    Database* const db_;
    Connection* const conn_;
  };
  Writer Write() { return Writer(this); }

  // A read transaction on a connection of the read pool (read_pool.h).
  absl::StatusOr<ReadPool::Lease> Reader() { return readers_->Acquire(); }
  // The read-only connections the reads run on; tests hold a read open
  // across a commit through it.
  ReadPool* readers() { return readers_.get(); }

  const std::string& path() const { return path_; }
  // Opened with Options::read_only: every write fails.
  bool read_only() const { return read_only_; }

  // A small write transaction (it bumps PRAGMA user_version, which Skerry does
  // not otherwise use): OK when the database can be written again (after a
  // full disk or an I/O error).
  absl::Status ProbeWrite();

  // Makes the statement running now, if any, fail soon (sqlite3_interrupt):
  // its transaction is rolled back. For a bounded shutdown; any thread, no
  // lock taken.
  void Interrupt() {
    sqlite3_interrupt(raw_);
    readers_->Interrupt();
  }

  // SQLite's quick_check (structure, no index contents), and the schema
  // (tables, indexes, triggers) compared with this version's: DATA_LOSS
  // naming the first findings. The whole file: `--check` and tests.
  absl::Status QuickCheck();
  // The coordinator's check at start: QuickCheck of every table but those
  // that grow with the evaluations (genomes, genome_metrics), and the
  // schema, so that a start does not read the whole file (1.8 GB at 10
  // million genomes). The whole file is checked next, while the coordinator
  // serves: FullCheckWhileServing.
  absl::Status QuickCheckAtStart();
  // The whole file's quick_check on a read connection of its own (the
  // writer goes on meanwhile, but the WAL is not checkpointed past the
  // check's snapshot until it ends): OK, DATA_LOSS naming the findings, or
  // CANCELLED after InterruptFullCheck.
  absl::Status FullCheckWhileServing();
  // Ends a FullCheckWhileServing running on another thread (soon).
  void InterruptFullCheck();
  // Nothing more is written to the file: every write transaction fails with
  // `why` (UNAVAILABLE, so the engine holds the fleet and says why in every
  // run summary, as for any storage trouble, never lifted by a probe).
  // Reads go on.
  void StopWrites(const absl::Status& why);
  absl::StatusOr<int> SchemaVersion();

  // ---- Ids (schema version 13) ----
  // The tables whose ids are never given twice.
  enum class IdTable { kRuns = 0, kGenomes = 1, kValidations = 2 };
  // The largest id `table` has ever given: its largest stored id or its
  // floor in id_floors, which RaiseIdFloors sets before rows are deleted.
  // New rows take ids above it.
  static absl::StatusOr<int64_t> LargestId(Writer& w, IdTable table);
  // Records every table's largest id as its floor: call it before deleting
  // rows, so that their ids are not given again.
  static absl::Status RaiseIdFloors(Writer& w);
  // The largest run id ever given: of a stored run, or named by a call that
  // succeeded in the audit log (a deleted or archived run's id stays there).
  // New runs take ids above it, so a run id is never given twice and the
  // audit log's entries about a run are about that run only.
  static absl::StatusOr<int64_t> LargestRunId(Writer& w);

 private:
  Database(std::string path, std::unique_ptr<Connection> conn)
      : path_(std::move(path)), raw_(conn->raw()), conn_(std::move(conn)) {}
  // The schema version stored (0 for an empty file); refuses foreign, damaged
  // and newer databases without writing anything.
  absl::StatusOr<int> StoredVersion() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status Migrate(int from_version) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  const std::string path_;
  bool read_only_ = false;  // set once by Open
  sqlite3* const raw_;      // conn_'s, for Interrupt only
  absl::Mutex check_mu_;
  // The connection FullCheckWhileServing runs on, while it runs.
  sqlite3* checking_ ABSL_GUARDED_BY(check_mu_) = nullptr;
  bool check_interrupted_ ABSL_GUARDED_BY(check_mu_) = false;
  // Held by a Writer for its lifetime.
  absl::Mutex mu_;
  std::unique_ptr<Connection> conn_ ABSL_GUARDED_BY(mu_);
  // Set once by Open, before the database is shared; the reads run on it,
  // never on conn_. Declared after conn_ so that it is closed first: the
  // writer, closing last, checkpoints the WAL into the database file and
  // removes it (a read-only connection cannot).
  std::unique_ptr<ReadPool> readers_;
};

// DATA_LOSS naming the first object whose schema differs from a fresh
// database's of this version (Database::QuickCheck and `--check`).
absl::Status VerifySchema(Connection* conn);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_DATABASE_H_
