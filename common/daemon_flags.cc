#include "common/daemon_flags.h"

#include <algorithm>

#include "absl/flags/commandlineflag.h"
#include "absl/flags/reflection.h"
#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_replace.h"

namespace skerry {
namespace {

absl::Status FlagError(absl::string_view name, absl::string_view what) {
  return absl::InvalidArgumentError(absl::StrCat("--", name, ": ", what));
}

// The type's own message from Abseil's "Illegal value 'V' specified for flag
// 'N'; MESSAGE", or "" when it has none.
std::string TypeMessage(const std::string& error, absl::string_view value,
                        absl::string_view abseil_name) {
  const std::string prefix = absl::StrCat(
      "Illegal value '", value, "' specified for flag '", abseil_name, "'; ");
  if (!absl::StartsWith(error, prefix)) return "";
  return error.substr(prefix.size());
}

}  // namespace

absl::Status DaemonFlagError(absl::string_view name, absl::string_view expected,
                             absl::string_view text) {
  return absl::InvalidArgumentError(absl::StrCat(
      "--", name, ": expected ", expected, ", got ", QuotePrefix(text)));
}

absl::StatusOr<DaemonCommandLine> ParseDaemonFlags(
    const std::vector<std::string>& args, absl::Span<const DaemonFlag> rows,
    bool repeats) {
  DaemonCommandLine out;
  for (size_t i = 0; i < args.size(); ++i) {
    const std::string& arg = args[i];
    if (arg == "-h") {
      out.help = true;
      return out;
    }
    if (!absl::StartsWith(arg, "--")) {
      return absl::InvalidArgumentError(absl::StrCat(
          "unexpected argument ", QuotePrefix(arg), " (flags start with --)"));
    }
    const size_t eq = arg.find('=');
    const std::string name =
        arg.substr(2, eq == std::string::npos ? std::string::npos : eq - 2);
    const bool inline_value = eq != std::string::npos;
    if (name == "help" || name == "version") {
      if (inline_value) {
        return FlagError(name, absl::StrCat("takes no value, got ",
                                            QuotePrefix(arg.substr(eq + 1))));
      }
      (name == "help" ? out.help : out.version) = true;
      return out;
    }
    auto row = std::find_if(rows.begin(), rows.end(), [&](const DaemonFlag& r) {
      return name == r.name;
    });
    if (row == rows.end()) {
      // Never echo a value: it might be a token given under a mistyped flag.
      return absl::InvalidArgumentError(
          absl::StrCat("unknown flag ", QuotePrefix(absl::StrCat("--", name)),
                       " (see --help)"));
    }
    const std::string abseil_name = absl::StrReplaceAll(name, {{"-", "_"}});
    absl::CommandLineFlag* flag = absl::FindCommandLineFlag(abseil_name);
    if (flag == nullptr) {
      return absl::InternalError(
          absl::StrCat("--", name, ": no Abseil flag ", abseil_name));
    }
    std::string value;
    if (flag->IsOfType<bool>()) {
      if (inline_value) {
        return FlagError(name, absl::StrCat("takes no value, got ",
                                            QuotePrefix(arg.substr(eq + 1))));
      }
      value = "true";
    } else if (inline_value) {
      value = arg.substr(eq + 1);
    } else if (i + 1 < args.size()) {
      value = args[++i];
    } else {
      return FlagError(name, "missing value");
    }
    if (!out.given.insert(name).second && !repeats) {
      return FlagError(name, "given more than once");
    }
    std::string error;
    if (!flag->ParseFrom(value, &error)) {
      if (row->expected != nullptr) {
        return DaemonFlagError(name, row->expected, value);
      }
      std::string message = TypeMessage(error, value, abseil_name);
      return FlagError(
          name, message.empty() ? absl::StrCat("bad value ", QuotePrefix(value))
                                : message);
    }
  }
  return out;
}

}  // namespace skerry
