// Bearer tokens: making them, and the only form in which they are stored.
//
// A token is "skt_" followed by 64 lower-case hex digits: 256 bits from the
// kernel's random source (getrandom). The store keeps only the SHA-256 of the
// whole text (FIPS 180-4, common/sha256.h). With 256 random bits no salt or
// slow hash is needed: nobody can guess a token, so nobody can search for one
// whose hash matches (common practice for machine-made API tokens). A hash
// lookup may take time that depends on the hash; that reveals nothing usable
// about any token.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_AUTH_TOKENS_H_
#define SKERRY_SERVER_AUTH_TOKENS_H_

#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace skerry::auth {

inline constexpr char kTokenPrefix[] = "skt_";

// A fresh token. Unavailable when the kernel gives no random bytes.
absl::StatusOr<std::string> NewToken();
// SHA-256 of the token text, 64 lower-case hex digits.
std::string HashToken(absl::string_view token);
// The prefix, then exactly 64 lower-case hex digits.
bool IsWellFormedToken(absl::string_view token);

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_TOKENS_H_
