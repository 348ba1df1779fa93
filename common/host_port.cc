#include "common/host_port.h"

#include <utility>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/quote.h"

namespace skerry {

namespace {

// The rule, with errors that do not name the flag.
absl::StatusOr<HostPort> Parse(absl::string_view text, bool allow_port_zero) {
  auto bad = [&](absl::string_view why) {
    return absl::InvalidArgumentError(absl::StrCat(
        "expected HOST:PORT (", why, "), got ", QuotePrefix(text)));
  };
  const size_t colon = text.rfind(':');
  if (colon == absl::string_view::npos) return bad("no port");
  absl::string_view host = text.substr(0, colon);
  absl::string_view port = text.substr(colon + 1);
  if (absl::StartsWith(host, "[")) {
    if (!absl::EndsWith(host, "]") || host.size() < 3) {
      return bad("unbalanced brackets around the IPv6 address");
    }
  } else if (host.find(':') != absl::string_view::npos) {
    return bad("an IPv6 address must be in brackets, as [::1]:7431");
  }
  if (host.empty()) return bad("empty host");
  for (char c : host) {
    if (c == ' ' || c == '\t' || c == '/' ||
        static_cast<unsigned char>(c) < 0x20 || c == 0x7f) {
      return bad("bad character in host");
    }
  }
  const uint32_t lo = allow_port_zero ? 0 : 1;
  uint64_t value = 0;
  bool digits = !port.empty() && port.size() <= 5;
  for (char c : port) {
    if (c < '0' || c > '9') {
      digits = false;
      break;
    }
    value = value * 10 + static_cast<uint64_t>(c - '0');
  }
  if (!digits || value < lo || value > 65535) {
    return bad(
        absl::StrCat("port must be a whole number from ", lo, " to 65535"));
  }
  return HostPort{std::string(host), static_cast<uint32_t>(value)};
}

}  // namespace

std::string HostPort::ToString() const {
  return empty() ? std::string() : absl::StrCat(host, ":", port);
}

absl::StatusOr<HostPort> ParseHostPort(absl::string_view flag,
                                       absl::string_view text,
                                       bool allow_port_zero) {
  absl::StatusOr<HostPort> address = Parse(text, allow_port_zero);
  if (!address.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat(flag, ": ", address.status().message()));
  }
  return address;
}

bool AbslParseFlag(absl::string_view text, HostPort* address,
                   std::string* error) {
  absl::StatusOr<HostPort> parsed = Parse(text, /*allow_port_zero=*/true);
  if (!parsed.ok()) {
    *error = std::string(parsed.status().message());
    return false;
  }
  *address = *std::move(parsed);
  return true;
}

std::string AbslUnparseFlag(const HostPort& address) {
  return address.ToString();
}

}  // namespace skerry
