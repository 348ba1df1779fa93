// Exclusive ownership of a database by one coordinator process.
//
// The lock is an flock(2) on the database file itself, taken through a file
// descriptor of its own. flock locks belong to the file (its inode), not to
// the name it was opened by, so a second coordinator started through a
// symbolic link, a hard link or any other spelling of the path ("./x.db",
// "dir/../x.db") is refused like one given the same path. The kernel drops the
// lock when the holder exits, however it exits (kill -9 included), so a crashed
// coordinator never leaves a stale lock, and nothing is left beside the
// database after a clean stop either. The refusal names the holder's pid, read
// from /proc/locks where there is one.
//
// flock and SQLite's own (POSIX, fcntl) locks are independent on local file
// systems, so this lock never blocks SQLite's readers or writers: `--check`,
// backups and other readers still work while a coordinator runs. On NFS, where
// flock may be emulated with fcntl locks, keep databases on local disks
// (docs/operations.md).
//
// Thread safety: an OwnerLock is created once and destroyed once.
#ifndef SKERRY_SERVER_STORE_OWNER_LOCK_H_
#define SKERRY_SERVER_STORE_OWNER_LOCK_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"

namespace skerry::store {

class OwnerLock {
 public:
  // FailedPrecondition naming the current holder when another process owns
  // the database. A missing file is created empty (created() says so), for
  // Store::Open to initialise.
  static absl::StatusOr<std::unique_ptr<OwnerLock>> Acquire(
      const std::string& db_path);
  // `--read-only`: a shared flock on an existing file (NotFound when it is
  // missing; nothing is created). Any number of read-only coordinators may
  // hold it together; a writing coordinator (Acquire) is refused while one
  // does, and a read-only one is refused while a writing one runs, since it
  // would show that writer's active runs as they were when it started.
  static absl::StatusOr<std::unique_ptr<OwnerLock>> AcquireShared(
      const std::string& db_path);
  ~OwnerLock();
  OwnerLock(const OwnerLock&) = delete;
  OwnerLock& operator=(const OwnerLock&) = delete;

  // True when Acquire made the (empty) database file.
  bool created() const { return created_; }

 private:
  OwnerLock(int fd, bool created) : fd_(fd), created_(created) {}
  int fd_;
  bool created_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_OWNER_LOCK_H_
