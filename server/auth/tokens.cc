#include "server/auth/tokens.h"

#include <sys/random.h>

#include <cerrno>
#include <cstdint>
#include <cstring>

#include "absl/strings/escaping.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/sha256.h"

namespace skerry::auth {

absl::StatusOr<std::string> NewToken() {
  uint8_t bytes[32];
  size_t got = 0;
  while (got < sizeof(bytes)) {
    const ssize_t n = getrandom(bytes + got, sizeof(bytes) - got, 0);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      return absl::UnavailableError(absl::StrCat(
          "no random bytes from the kernel: ", std::strerror(errno)));
    }
    got += static_cast<size_t>(n);
  }
  return absl::StrCat(
      kTokenPrefix, absl::BytesToHexString(absl::string_view(
                        reinterpret_cast<const char*>(bytes), sizeof(bytes))));
}

std::string HashToken(absl::string_view token) {
  Sha256 h;
  h.Update(token);
  return h.FinishHex();
}

bool IsWellFormedToken(absl::string_view token) {
  if (!absl::StartsWith(token, kTokenPrefix)) return false;
  token.remove_prefix(sizeof(kTokenPrefix) - 1);
  if (token.size() != 64) return false;
  for (char c : token) {
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return true;
}

}  // namespace skerry::auth
