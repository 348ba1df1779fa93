#include "tests/fault/fault_vfs.h"

#include <sqlite3.h>

#include <cstdlib>
#include <cstring>
#include <mutex>
#include <utility>

namespace skerry::testing {
namespace {

// WAL shared-memory lock slots (SQLite's wal.c): 0 is the write lock, 1 the
// checkpoint lock. A writer that meets another writer fails on slot 0.
constexpr int kWalWriteLock = 0;
constexpr int kWalCheckpointLock = 1;

FaultVfs* g_fault = nullptr;
sqlite3_vfs* g_base = nullptr;

// Our file: the io methods below, then the base VFS's file in the same block
// (szOsFile covers both).
struct FaultFile {
  sqlite3_file base;
  sqlite3_file* real;
};

sqlite3_file* Real(sqlite3_file* f) {
  return reinterpret_cast<FaultFile*>(f)->real;
}

int Close(sqlite3_file* f) {
  sqlite3_file* r = Real(f);
  return r->pMethods != nullptr ? r->pMethods->xClose(r) : SQLITE_OK;
}
int Read(sqlite3_file* f, void* buf, int n, sqlite3_int64 off) {
  return Real(f)->pMethods->xRead(Real(f), buf, n, off);
}
int Write(sqlite3_file* f, const void* buf, int n, sqlite3_int64 off) {
  if (int rc = g_fault->FaultFor(FaultVfs::Op::kWrite); rc != SQLITE_OK)
    return rc;
  return Real(f)->pMethods->xWrite(Real(f), buf, n, off);
}
int Truncate(sqlite3_file* f, sqlite3_int64 size) {
  if (int rc = g_fault->FaultFor(FaultVfs::Op::kTruncate); rc != SQLITE_OK) {
    return rc;
  }
  return Real(f)->pMethods->xTruncate(Real(f), size);
}
int Sync(sqlite3_file* f, int flags) {
  g_fault->RunSyncHook();
  if (int rc = g_fault->FaultFor(FaultVfs::Op::kSync); rc != SQLITE_OK)
    return rc;
  return Real(f)->pMethods->xSync(Real(f), flags);
}
int FileSize(sqlite3_file* f, sqlite3_int64* size) {
  return Real(f)->pMethods->xFileSize(Real(f), size);
}
int Lock(sqlite3_file* f, int level) {
  if (int rc = g_fault->FaultFor(FaultVfs::Op::kLock); rc != SQLITE_OK)
    return rc;
  return Real(f)->pMethods->xLock(Real(f), level);
}
int Unlock(sqlite3_file* f, int level) {
  return Real(f)->pMethods->xUnlock(Real(f), level);
}
int CheckReservedLock(sqlite3_file* f, int* out) {
  return Real(f)->pMethods->xCheckReservedLock(Real(f), out);
}
int FileControl(sqlite3_file* f, int op, void* arg) {
  return Real(f)->pMethods->xFileControl(Real(f), op, arg);
}
int SectorSize(sqlite3_file* f) {
  return Real(f)->pMethods->xSectorSize(Real(f));
}
int DeviceCharacteristics(sqlite3_file* f) {
  return Real(f)->pMethods->xDeviceCharacteristics(Real(f));
}
int ShmMap(sqlite3_file* f, int region, int size, int extend,
           void volatile** out) {
  return Real(f)->pMethods->xShmMap(Real(f), region, size, extend, out);
}
int ShmLock(sqlite3_file* f, int offset, int n, int flags) {
  const bool exclusive_lock =
      (flags & SQLITE_SHM_LOCK) != 0 && (flags & SQLITE_SHM_EXCLUSIVE) != 0;
  if (exclusive_lock &&
      (offset == kWalWriteLock || offset == kWalCheckpointLock)) {
    if (int rc = g_fault->FaultFor(FaultVfs::Op::kLock); rc != SQLITE_OK) {
      return rc;
    }
  }
  return Real(f)->pMethods->xShmLock(Real(f), offset, n, flags);
}
void ShmBarrier(sqlite3_file* f) { Real(f)->pMethods->xShmBarrier(Real(f)); }
int ShmUnmap(sqlite3_file* f, int delete_flag) {
  return Real(f)->pMethods->xShmUnmap(Real(f), delete_flag);
}
int Fetch(sqlite3_file* f, sqlite3_int64 off, int n, void** out) {
  sqlite3_file* r = Real(f);
  if (r->pMethods->iVersion < 3) {
    *out = nullptr;
    return SQLITE_OK;
  }
  return r->pMethods->xFetch(r, off, n, out);
}
int Unfetch(sqlite3_file* f, sqlite3_int64 off, void* p) {
  sqlite3_file* r = Real(f);
  if (r->pMethods->iVersion < 3) return SQLITE_OK;
  return r->pMethods->xUnfetch(r, off, p);
}

const sqlite3_io_methods kIoMethods = {3,
                                       Close,
                                       Read,
                                       Write,
                                       Truncate,
                                       Sync,
                                       FileSize,
                                       Lock,
                                       Unlock,
                                       CheckReservedLock,
                                       FileControl,
                                       SectorSize,
                                       DeviceCharacteristics,
                                       ShmMap,
                                       ShmLock,
                                       ShmBarrier,
                                       ShmUnmap,
                                       Fetch,
                                       Unfetch};

int Open(sqlite3_vfs*, const char* name, sqlite3_file* f, int flags,
         int* out_flags) {
  FaultFile* ff = reinterpret_cast<FaultFile*>(f);
  ff->real = reinterpret_cast<sqlite3_file*>(ff + 1);
  std::memset(ff->real, 0, static_cast<size_t>(g_base->szOsFile));
  const int rc = g_base->xOpen(g_base, name, ff->real, flags, out_flags);
  // SQLite calls xClose whenever pMethods is set, even after a failed open.
  ff->base.pMethods = ff->real->pMethods != nullptr ? &kIoMethods : nullptr;
  return rc;
}
int Delete(sqlite3_vfs*, const char* name, int sync_dir) {
  return g_base->xDelete(g_base, name, sync_dir);
}
int Access(sqlite3_vfs*, const char* name, int flags, int* out) {
  return g_base->xAccess(g_base, name, flags, out);
}
int FullPathname(sqlite3_vfs*, const char* name, int n, char* out) {
  return g_base->xFullPathname(g_base, name, n, out);
}
void* DlOpen(sqlite3_vfs*, const char* name) {
  return g_base->xDlOpen(g_base, name);
}
void DlError(sqlite3_vfs*, int n, char* out) {
  g_base->xDlError(g_base, n, out);
}
void (*DlSym(sqlite3_vfs*, void* h, const char* sym))(void) {
  return g_base->xDlSym(g_base, h, sym);
}
void DlClose(sqlite3_vfs*, void* h) { g_base->xDlClose(g_base, h); }
int Randomness(sqlite3_vfs*, int n, char* out) {
  return g_base->xRandomness(g_base, n, out);
}
int Sleep(sqlite3_vfs*, int us) { return g_base->xSleep(g_base, us); }
int CurrentTime(sqlite3_vfs*, double* out) {
  return g_base->xCurrentTime(g_base, out);
}
int GetLastError(sqlite3_vfs*, int n, char* out) {
  return g_base->xGetLastError != nullptr
             ? g_base->xGetLastError(g_base, n, out)
             : 0;
}
int CurrentTimeInt64(sqlite3_vfs*, sqlite3_int64* out) {
  if (g_base->iVersion >= 2 && g_base->xCurrentTimeInt64 != nullptr) {
    return g_base->xCurrentTimeInt64(g_base, out);
  }
  double day = 0;
  const int rc = g_base->xCurrentTime(g_base, &day);
  *out = static_cast<sqlite3_int64>(day * 86400000.0);
  return rc;
}

sqlite3_vfs g_vfs;

}  // namespace

std::string FaultKindName(FaultKind kind) {
  switch (kind) {
    case FaultKind::kIoErr:
      return "IOERR";
    case FaultKind::kFull:
      return "FULL";
    case FaultKind::kFsync:
      return "IOERR_FSYNC";
    case FaultKind::kBusy:
      return "BUSY";
  }
  return "?";
}

FaultVfs* FaultVfs::Install() {
  static std::once_flag once;
  std::call_once(once, [] {
    g_fault = new FaultVfs();
    g_base = sqlite3_vfs_find(nullptr);
    if (g_base == nullptr) std::abort();  // SQLite without a default VFS
    g_vfs = sqlite3_vfs{};
    g_vfs.iVersion = 2;
    g_vfs.szOsFile = static_cast<int>(sizeof(FaultFile)) + g_base->szOsFile;
    g_vfs.mxPathname = g_base->mxPathname;
    g_vfs.zName = kName;
    g_vfs.xOpen = Open;
    g_vfs.xDelete = Delete;
    g_vfs.xAccess = Access;
    g_vfs.xFullPathname = FullPathname;
    g_vfs.xDlOpen = DlOpen;
    g_vfs.xDlError = DlError;
    g_vfs.xDlSym = DlSym;
    g_vfs.xDlClose = DlClose;
    g_vfs.xRandomness = Randomness;
    g_vfs.xSleep = Sleep;
    g_vfs.xCurrentTime = CurrentTime;
    g_vfs.xGetLastError = GetLastError;
    g_vfs.xCurrentTimeInt64 = CurrentTimeInt64;
    if (sqlite3_vfs_register(&g_vfs, /*makeDflt=*/0) != SQLITE_OK) std::abort();
  });
  return g_fault;
}

void FaultVfs::Arm(FaultKind kind, int64_t nth, bool persistent) {
  armed_.store(false);
  kind_.store(static_cast<int>(kind));
  nth_.store(nth < 1 ? 1 : nth);
  persistent_.store(persistent);
  counted_.store(0);
  injected_.store(0);
  armed_.store(true);
}

void FaultVfs::Disarm() { armed_.store(false); }

void FaultVfs::SetSyncHook(std::function<void()> hook) {
  std::lock_guard<std::mutex> l(hook_mu_);
  sync_hook_ = std::move(hook);
}

void FaultVfs::RunSyncHook() {
  std::function<void()> hook;
  {
    std::lock_guard<std::mutex> l(hook_mu_);
    hook = sync_hook_;
  }
  if (hook) hook();
}

int FaultVfs::FaultFor(Op op) {
  if (!armed_.load()) return SQLITE_OK;
  int rc = SQLITE_OK;  // the error, when this call is of the armed class
  switch (static_cast<FaultKind>(kind_.load())) {
    case FaultKind::kIoErr:
      if (op == Op::kWrite) rc = SQLITE_IOERR_WRITE;
      if (op == Op::kSync) rc = SQLITE_IOERR_FSYNC;
      if (op == Op::kTruncate) rc = SQLITE_IOERR_TRUNCATE;
      break;
    case FaultKind::kFull:
      if (op == Op::kWrite) rc = SQLITE_FULL;
      break;
    case FaultKind::kFsync:
      if (op == Op::kSync) rc = SQLITE_IOERR_FSYNC;
      break;
    case FaultKind::kBusy:
      if (op == Op::kLock) rc = SQLITE_BUSY;
      break;
  }
  if (rc == SQLITE_OK) return SQLITE_OK;
  const int64_t n = ++counted_;
  const int64_t nth = nth_.load();
  if (n == nth || (persistent_.load() && n > nth)) {
    ++injected_;
    return rc;
  }
  return SQLITE_OK;
}

}  // namespace skerry::testing
