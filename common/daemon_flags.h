// The command lines of skerry-coordinator and skerry-worker, read into their
// Abseil flags (ABSL_FLAG in server/coordinator_flags.cc and worker/flags.cc).
//
// Both daemons write flags as they always have, with dashes (--max-wait-ms);
// an Abseil flag's name is a C++ name, so its '-' are '_' (max_wait_ms).
// Rules, the same for both: --name=value and --name value; a switch (a bool
// flag) takes no value; --help or -h, and --version, end the parse at once
// (flags before them are still checked); anything else is an error that names
// the flag as written and quotes the value (never the value of an unknown
// flag: it might be a token under a mistyped name). Exit code 2 is the
// caller's.
//
// Why not absl::ParseCommandLine: it exits the process (code 1) on a bad
// flag, prints Abseil's own --help, and knows only '_' names.
//
// Value types with their own rule: HostPort (common/host_port.h) and
// WholeNumber<kMin, kMax> below; a row's `expected` replaces the message of
// a plain type (double, std::string).
//
// Thread safety: parsing sets process-wide flags, so one parse at a time. A
// caller that parses more than once (tests) reads only the flags of
// DaemonCommandLine::given, which each parse sets afresh; the values of the
// others are left from earlier parses. (absl::FlagSaver would restore them,
// but logs each restored flag on stderr.)
#ifndef SKERRY_COMMON_DAEMON_FLAGS_H_
#define SKERRY_COMMON_DAEMON_FLAGS_H_

#include <cstdint>
#include <set>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "common/quote.h"

namespace skerry {

// A decimal whole number in [kMin, kMax]: digits only, no sign, no space, no
// base prefix (Abseil's own integers take " 4" and "0x10").
template <uint64_t kMin, uint64_t kMax>
struct WholeNumber {
  static_assert(kMin <= kMax);
  uint64_t value = 0;
};

template <uint64_t kMin, uint64_t kMax>
bool AbslParseFlag(absl::string_view text, WholeNumber<kMin, kMax>* number,
                   std::string* error) {
  uint64_t value = 0;
  bool ok = !text.empty() && text.size() <= 19;  // 19 digits fit in 64 bits
  for (char c : text) {
    if (!ok) break;
    ok = c >= '0' && c <= '9';
    value = value * 10 + static_cast<uint64_t>(c - '0');
  }
  if (!ok || value < kMin || value > kMax) {
    *error = absl::StrCat("expected a whole number from ", kMin, " to ", kMax,
                          ", got ", QuotePrefix(text));
    return false;
  }
  number->value = value;
  return true;
}

template <uint64_t kMin, uint64_t kMax>
std::string AbslUnparseFlag(const WholeNumber<kMin, kMax>& number) {
  return absl::StrCat(number.value);
}

// One flag a daemon takes.
struct DaemonFlag {
  const char* name;  // as written, without "--": "max-wait-ms"
  // What a bad value gets told, for types without a message of their own:
  // "a number from 0.1 to 86400". nullptr: the type's message.
  const char* expected = nullptr;
};

struct DaemonCommandLine {
  bool help = false;            // --help or -h
  bool version = false;         // --version
  std::set<std::string> given;  // names of the flags given, as written
};

// Sets the Abseil flag of each row given in `args` (argv without argv[0]).
// `repeats`: a flag given twice takes the last value; otherwise an error.
// InvalidArgument as the header says; Internal when a row names no Abseil
// flag (a bug of the caller).
absl::StatusOr<DaemonCommandLine> ParseDaemonFlags(
    const std::vector<std::string>& args, absl::Span<const DaemonFlag> rows,
    bool repeats);

// InvalidArgument "--NAME: expected EXPECTED, got "TEXT"", the message of a
// value refused after parsing.
absl::Status DaemonFlagError(absl::string_view name, absl::string_view expected,
                             absl::string_view text);

}  // namespace skerry

#endif  // SKERRY_COMMON_DAEMON_FLAGS_H_
