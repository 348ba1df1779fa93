#include "common/metric_bounds.h"

#include <cmath>

#include "absl/strings/str_cat.h"

namespace skerry {
namespace {

bool NameChar(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') ||
         (c >= '0' && c <= '9') || c == '_' || c == '.' || c == '-';
}

template <typename M>
absl::Status Check(const M& metrics) {
  if (metrics.size() > kMaxMetrics) {
    return absl::InvalidArgumentError(
        absl::StrCat("metrics: at most ", kMaxMetrics, " per evaluation, got ",
                     metrics.size()));
  }
  for (const auto& [name, value] : metrics) {
    if (name.empty() || name.size() > kMaxMetricNameBytes) {
      return absl::InvalidArgumentError(
          absl::StrCat("metrics: a name has 1 to ", kMaxMetricNameBytes,
                       " characters, got ", name.size()));
    }
    for (char c : name) {
      if (!NameChar(c)) {
        return absl::InvalidArgumentError(absl::StrCat(
            "metrics: name \"", name.substr(0, kMaxMetricNameBytes),
            "\" may hold only letters, digits, '_', '.' and '-'"));
      }
    }
    if (!std::isfinite(value)) {
      return absl::InvalidArgumentError(absl::StrCat(
          "metrics: \"", name, "\" is not a finite number (", value, ")"));
    }
  }
  return absl::OkStatus();
}

}  // namespace

absl::Status CheckMetrics(const google::protobuf::Map<std::string, double>& m) {
  return Check(m);
}
absl::Status CheckMetrics(const std::map<std::string, double>& m) {
  return Check(m);
}

}  // namespace skerry
