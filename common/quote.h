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

}  // namespace skerry

#endif  // SKERRY_COMMON_QUOTE_H_
