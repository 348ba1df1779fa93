#include "cli/metrics_text.h"

#include <map>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "cli/format.h"

namespace skerry::cli {

std::string FormatGenomeMetrics(
    const google::protobuf::Map<std::string, double>& metrics) {
  const std::map<std::string, double> sorted(metrics.begin(), metrics.end());
  std::string out;
  for (const auto& [name, value] : sorted) {
    absl::StrAppend(&out, "metric      ", name, "  ",
                    absl::StrFormat("%.10g", value), "\n");
  }
  return out;
}

std::string FormatMetricMeans(
    const std::vector<skerry::v1::GenerationStats>& history, size_t max_rows) {
  std::set<std::string> names;
  std::vector<const skerry::v1::GenerationStats*> rows;
  for (const skerry::v1::GenerationStats& g : history) {
    if (g.metric_means().empty()) continue;
    rows.push_back(&g);
    for (const auto& [name, value] : g.metric_means()) names.insert(name);
  }
  if (rows.empty()) return "";
  if (max_rows > 0 && rows.size() > max_rows) {
    rows.erase(rows.begin(), rows.end() - static_cast<long>(max_rows));
  }
  std::vector<std::string> header = {"ISLAND", "GEN"};
  std::vector<size_t> right = {0, 1};
  for (const std::string& n : names) {
    right.push_back(header.size());
    header.push_back(n);
  }
  std::vector<std::vector<std::string>> table;
  for (const skerry::v1::GenerationStats* g : rows) {
    std::vector<std::string> row = {absl::StrCat(g->island()),
                                    absl::StrCat(g->generation())};
    for (const std::string& n : names) {
      auto it = g->metric_means().find(n);
      row.push_back(it == g->metric_means().end()
                        ? "-"
                        : absl::StrFormat("%.6g", it->second));
    }
    table.push_back(std::move(row));
  }
  return absl::StrCat("\nevaluator metrics, mean per generation:\n",
                      FormatTable(header, table, right));
}

}  // namespace skerry::cli
