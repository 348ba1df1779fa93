// A test-only SQLite VFS, "skerry-fault", that wraps the default VFS and fails
// chosen I/O calls on demand, in the manner of SQLite's own I/O-error tests.
//
// Every call is forwarded to the default VFS (sqlite3_vfs_find(nullptr)). The
// io methods of files opened through it count the calls of the armed fault's
// class; the Nth counted call fails, and with `persistent` every later one too:
//
//   kind      counted calls                          error returned
//   kIoErr    xWrite, xSync, xTruncate               SQLITE_IOERR_WRITE /
//   _FSYNC /
//                                                    _TRUNCATE
//   kFull     xWrite                                 SQLITE_FULL
//   kFsync    xSync                                  SQLITE_IOERR_FSYNC
//   kBusy     xLock, and exclusive xShmLock on the   SQLITE_BUSY
//             WAL's write and checkpoint locks
//
// (In WAL mode a connection holds its SHARED lock on the database file for as
// long as it is open, so writers meet "busy" on the WAL's shared-memory write
// lock; that is why kBusy counts those too.)
//
// Usage:
//   FaultVfs* vfs = FaultVfs::Install();
//   Store::Open(path, {.vfs = FaultVfs::kName});
//   vfs->Arm(FaultKind::kFull, /*nth=*/3, /*persistent=*/true);
//   ... the operation ...
//   vfs->Disarm();
//
// Invariant: when disarmed, the VFS behaves exactly as the default one.
// Thread safety: Install, Arm, Disarm and the counters may be used from any
// thread; the counters are atomics, so SQLite may call in from any connection.
#ifndef SKERRY_TESTS_FAULT_FAULT_VFS_H_
#define SKERRY_TESTS_FAULT_FAULT_VFS_H_

#include <atomic>
#include <cstdint>
#include <functional>
#include <mutex>
#include <string>

namespace skerry::testing {

enum class FaultKind { kIoErr, kFull, kFsync, kBusy };

std::string FaultKindName(FaultKind kind);

class FaultVfs {
 public:
  static constexpr const char kName[] = "skerry-fault";

  // Registers the VFS once per process (not as the default) and returns it.
  static FaultVfs* Install();

  // Resets the counters and fails the nth counted call of `kind` (nth >= 1),
  // and every later one when `persistent`.
  void Arm(FaultKind kind, int64_t nth, bool persistent);
  // Back to plain forwarding; the counters keep their values.
  void Disarm();

  // Calls of the armed kind counted since the last Arm.
  int64_t counted() const { return counted_.load(); }
  // Faults injected since the last Arm.
  int64_t injected() const { return injected_.load(); }

  // While set, every xSync of a file opened through this VFS calls `hook`
  // first, on the syncing thread (a test holds a commit at its fsync this
  // way). Empty: none. Any thread.
  void SetSyncHook(std::function<void()> hook);
  void RunSyncHook();

  // The io calls that may fail.
  enum class Op { kWrite, kSync, kTruncate, kLock };
  // Called by the io methods before forwarding: the SQLite error this call
  // must return, or SQLITE_OK to forward it.
  int FaultFor(Op op);

 private:
  FaultVfs() = default;

  std::atomic<bool> armed_{false};
  std::atomic<int> kind_{0};
  std::atomic<int64_t> nth_{0};
  std::atomic<bool> persistent_{false};
  std::atomic<int64_t> counted_{0};
  std::atomic<int64_t> injected_{0};
  std::mutex hook_mu_;
  std::function<void()> sync_hook_;  // guarded by hook_mu_
};

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_FAULT_FAULT_VFS_H_
