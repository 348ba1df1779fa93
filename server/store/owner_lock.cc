#include "server/store/owner_lock.h"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/strings/strip.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"

namespace skerry::store {
namespace {

std::string ReadAll(int fd) {
  std::string out;
  char buf[512];
  lseek(fd, 0, SEEK_SET);
  ssize_t n;
  while ((n = read(fd, buf, sizeof(buf))) > 0 && out.size() < 4096) {
    out.append(buf, static_cast<size_t>(n));
  }
  return out;
}

}  // namespace

absl::StatusOr<std::unique_ptr<OwnerLock>> OwnerLock::Acquire(
    const std::string& db_path) {
  const std::string path = db_path + ".owner";
  const int fd = open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) {
    return absl::UnavailableError(absl::StrCat(
        "cannot open the ownership file ", path, ": ", std::strerror(errno)));
  }
  if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    std::string holder(absl::StripAsciiWhitespace(ReadAll(fd)));
    close(fd);
    if (err == EWOULDBLOCK) {
      return absl::FailedPreconditionError(absl::StrCat(
          "database ", db_path, " is owned by another running coordinator (",
          holder.empty() ? "holder unknown" : holder,
          "); only one coordinator may use a database at a time"));
    }
    return absl::UnavailableError(
        absl::StrCat("cannot lock ", path, ": ", std::strerror(err)));
  }
  char host[256] = {0};
  gethostname(host, sizeof(host) - 1);
  const std::string me =
      absl::StrCat("pid ", getpid(), " on ", host, ", since ",
                   absl::FormatTime("%Y-%m-%d %H:%M:%S UTC", absl::Now(),
                                    absl::UTCTimeZone()),
                   "\n");
  if (ftruncate(fd, 0) != 0 ||
      pwrite(fd, me.data(), me.size(), 0) != static_cast<ssize_t>(me.size())) {
    // The lock holds even if the note could not be written.
  }
  return std::unique_ptr<OwnerLock>(new OwnerLock(fd));
}

OwnerLock::~OwnerLock() {
  flock(fd_, LOCK_UN);
  close(fd_);
}

}  // namespace skerry::store
