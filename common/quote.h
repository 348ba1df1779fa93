// Quoting outside input in error messages, bounded.
//
// An error message may quote what it refuses, but never all of it: a 1 MiB
// name quoted whole makes a 1 MiB gRPC status message, which a default client
// cannot even receive (grpc-message travels in a trailer, and trailers are
// capped at 8 KiB by default; from memory). QuotePrefix keeps a short prefix,
// cut at a UTF-8 character boundary, and says how long the whole was.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_QUOTE_H_
#define SKERRY_COMMON_QUOTE_H_

#include <cstddef>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"

namespace skerry {

// The longest prefix of `text` of at most `max_bytes` bytes that does not
// end inside a UTF-8 sequence.
inline absl::string_view Utf8Prefix(absl::string_view text, size_t max_bytes) {
  if (text.size() <= max_bytes) return text;
  size_t n = max_bytes;
  // Back off continuation bytes (10xxxxxx) so the cut falls before a lead
  // byte; at most 3 of them precede any lead byte in valid UTF-8.
  for (int i = 0; i < 4 && n > 0; ++i) {
    if ((static_cast<unsigned char>(text[n]) & 0xC0) != 0x80) break;
    --n;
  }
  return text.substr(0, n);
}

// `text` as given when short, else its first bytes and its length:
// "abc..." (1048576 bytes).
inline std::string QuotePrefix(absl::string_view text, size_t max_bytes = 64) {
  if (text.size() <= max_bytes) return absl::StrCat("\"", text, "\"");
  return absl::StrCat("\"", Utf8Prefix(text, max_bytes), "...\" (", text.size(),
                      " bytes)");
}

// Bytes of a run name the coordinator answers with when it has no name
// budget of its own (--max-name-bytes 0 in tests).
inline constexpr size_t kAnsweredNameFallbackBytes = 4096;

// A stored run name as the coordinator answers with it (list, show, watch,
// the live page). Runs stored before the name budget existed may have names
// of megabytes; such a name is cut to its first `max_bytes` bytes (at a UTF-8
// boundary; 0: kAnsweredNameFallbackBytes) and marked:
// "first bytes...[name truncated: 10485760 bytes]". The stored name is
// unchanged. docs/operations.md, "Budgets".
inline std::string AnsweredName(absl::string_view name, size_t max_bytes) {
  if (max_bytes == 0) max_bytes = kAnsweredNameFallbackBytes;
  if (name.size() <= max_bytes) return std::string(name);
  return absl::StrCat(Utf8Prefix(name, max_bytes),
                      "...[name truncated: ", name.size(), " bytes]");
}

}  // namespace skerry

#endif  // SKERRY_COMMON_QUOTE_H_
