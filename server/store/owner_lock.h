// Exclusive ownership of a database by one coordinator process.
//
// The lock is an flock(2) on a file beside the database (DB + ".owner"), which
// also records who holds it (host, pid, start time). The kernel drops the lock
// when the holder exits, however it exits (kill -9 included), so a crashed
// coordinator never leaves a stale lock; the text in the file is only for the
// refusal message.
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
  // the database.
  static absl::StatusOr<std::unique_ptr<OwnerLock>> Acquire(
      const std::string& db_path);
  ~OwnerLock();
  OwnerLock(const OwnerLock&) = delete;
  OwnerLock& operator=(const OwnerLock&) = delete;

 private:
  explicit OwnerLock(int fd) : fd_(fd) {}
  int fd_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_OWNER_LOCK_H_
