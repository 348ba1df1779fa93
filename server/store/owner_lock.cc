#include "server/store/owner_lock.h"

#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"

namespace skerry::store {
namespace {

// The pid holding an flock on the file open as `fd`, from /proc/locks
// ("1: FLOCK  ADVISORY  WRITE 1234 08:01:5678 0 EOF"); empty when unknown.
std::string FlockHolder(int fd) {
  struct stat st;
  if (fstat(fd, &st) != 0) return "";
  std::ifstream in("/proc/locks");
  std::string line;
  for (int n = 0; n < 100000 && std::getline(in, line); ++n) {
    std::vector<std::string> f =
        absl::StrSplit(line, ' ', absl::SkipWhitespace());
    if (f.size() < 6 || f[1] != "FLOCK") continue;
    // f[5] is MAJOR:MINOR:INODE in hex:hex:decimal.
    std::vector<std::string> dev = absl::StrSplit(f[5], ':');
    if (dev.size() != 3) continue;
    unsigned long long ino = 0;
    if (!absl::SimpleAtoi(dev[2], &ino) || ino != st.st_ino) continue;
    return f[4];
  }
  return "";
}

}  // namespace

absl::StatusOr<std::unique_ptr<OwnerLock>> OwnerLock::Acquire(
    const std::string& db_path) {
  bool created = false;
  int fd = open(db_path.c_str(), O_RDWR | O_CLOEXEC);
  if (fd < 0 && errno == ENOENT) {
    fd = open(db_path.c_str(), O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    created = fd >= 0;
    if (fd < 0 && errno == EEXIST)
      fd = open(db_path.c_str(), O_RDWR | O_CLOEXEC);
  }
  if (fd < 0 && (errno == EACCES || errno == EROFS)) {
    // Lockable read-only too; Coordinator::Start then refuses to run on a
    // file it cannot write, with a message of its own.
    fd = open(db_path.c_str(), O_RDONLY | O_CLOEXEC);
  }
  if (fd < 0) {
    return absl::UnavailableError(absl::StrCat(
        "cannot open the database ", db_path, ": ", std::strerror(errno)));
  }
  if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    const std::string holder = FlockHolder(fd);
    close(fd);
    if (err == EWOULDBLOCK) {
      return absl::FailedPreconditionError(absl::StrCat(
          "database ", db_path, " is owned by another running coordinator (",
          holder.empty() ? "holder unknown" : absl::StrCat("pid ", holder),
          "), perhaps through another name or link of the same file, or "
          "by --read-only coordinators; only one coordinator may write a "
          "database, and no --read-only one may serve it meanwhile"));
    }
    return absl::UnavailableError(
        absl::StrCat("cannot lock ", db_path, ": ", std::strerror(err)));
  }
  return std::unique_ptr<OwnerLock>(new OwnerLock(fd, created));
}

absl::StatusOr<std::unique_ptr<OwnerLock>> OwnerLock::AcquireShared(
    const std::string& db_path) {
  const int fd = open(db_path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0 && errno == ENOENT) {
    return absl::NotFoundError(absl::StrCat(
        "no database ", db_path,
        "; --read-only serves an existing one and creates nothing"));
  }
  if (fd < 0) {
    return absl::UnavailableError(absl::StrCat(
        "cannot open the database ", db_path, ": ", std::strerror(errno)));
  }
  if (flock(fd, LOCK_SH | LOCK_NB) != 0) {
    const int err = errno;
    const std::string holder = FlockHolder(fd);
    close(fd);
    if (err == EWOULDBLOCK) {
      return absl::FailedPreconditionError(absl::StrCat(
          "database ", db_path, " is owned by a running coordinator (",
          holder.empty() ? "holder unknown" : absl::StrCat("pid ", holder),
          ") that writes it; a --read-only coordinator would show its active "
          "runs as they were at start. Ask that coordinator (a viewer token "
          "is enough), or serve a copy read-only (skerry backup)"));
    }
    return absl::UnavailableError(
        absl::StrCat("cannot lock ", db_path, ": ", std::strerror(err)));
  }
  return std::unique_ptr<OwnerLock>(new OwnerLock(fd, false));
}

OwnerLock::~OwnerLock() {
  flock(fd_, LOCK_UN);
  close(fd_);
}

}  // namespace skerry::store
