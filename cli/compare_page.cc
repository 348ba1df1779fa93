#include "cli/compare_page.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <optional>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_replace.h"
#include "absl/time/clock.h"
#include "cli/format.h"
#include "common/rank_sum.h"
#include "server/http/report_page.h"

namespace skerry::cli {
namespace {

constexpr char kStyle[] = R"css(
body { font-family: sans-serif; margin: 1.5em; color: #222; }
h1 { font-size: 1.4em; } h2 { font-size: 1.15em; margin-top: 1.5em; }
.chart { position: relative; height: 420px; max-width: 1000px; }
table { border-collapse: collapse; font-size: 0.85em; }
td, th { border: 1px solid #ccc; padding: 2px 6px; text-align: right; }
pre { background: #f6f6f6; padding: 0.8em; overflow-x: auto; }
)css";

// Draws one line per group's median and dashed lines for its quartiles.
constexpr char kScript[] = R"js(
(function () {
  var data = JSON.parse(document.getElementById('skerry-compare').textContent);
  var colors = ['#1f77b4', '#d62728', '#2ca02c', '#9467bd', '#ff7f0e',
                '#17becf', '#8c564b', '#e377c2'];
  var sets = [];
  data.groups.forEach(function (g, i) {
    var c = colors[i % colors.length];
    function pts(k) {
      return data.evaluations.map(function (x, j) {
        return {x: x, y: g[k][j]};
      });
    }
    sets.push({label: g.label + ' median', data: pts('median'),
               borderColor: c, backgroundColor: c, pointRadius: 0,
               borderWidth: 2, spanGaps: false});
    sets.push({label: g.label + ' lower quartile', data: pts('q1'),
               borderColor: c, borderDash: [4, 4], pointRadius: 0,
               borderWidth: 1});
    sets.push({label: g.label + ' upper quartile', data: pts('q3'),
               borderColor: c, borderDash: [4, 4], pointRadius: 0,
               borderWidth: 1});
  });
  new Chart(document.getElementById('skerry-compare-chart'), {
    type: 'line',
    data: {datasets: sets},
    options: {
      animation: false, maintainAspectRatio: false, parsing: true,
      scales: {x: {type: 'linear', title: {display: true,
                                           text: 'evaluations'}},
               y: {title: {display: true, text: 'best score so far'}}}
    }
  });
})();
)js";

std::string Json(std::optional<double> v) {
  if (!v.has_value() || !std::isfinite(*v)) return "null";
  return absl::StrFormat("%.17g", *v);
}

// A JSON string that cannot end the <script> element it sits in.
std::string JsonString(const std::string& s) {
  std::string out = "\"";
  for (char c : s) {
    if (c == '"' || c == '\\') {
      out += '\\';
      out += c;
    } else if (c == '<' || c == '>' || c == '&' ||
               static_cast<unsigned char>(c) < 0x20) {
      absl::StrAppend(&out, absl::StrFormat("\\u%04x", c));
    } else {
      out += c;
    }
  }
  return out + "\"";
}

struct Band {
  std::vector<std::optional<double>> median, q1, q3;
  std::vector<size_t> n;
};

Band BandOf(const CompareGroup& g, const std::vector<uint64_t>& grid) {
  Band b;
  for (uint64_t at : grid) {
    std::vector<double> values;
    for (const BestCurve& c : g.curves) {
      if (std::optional<double> v = BestAt(c, at)) values.push_back(*v);
    }
    b.n.push_back(values.size());
    if (values.empty()) {
      b.median.push_back(std::nullopt);
      b.q1.push_back(std::nullopt);
      b.q3.push_back(std::nullopt);
      continue;
    }
    b.median.push_back(Quantile(values, 0.5));
    b.q1.push_back(Quantile(values, 0.25));
    b.q3.push_back(Quantile(values, 0.75));
  }
  return b;
}

std::string Cell(std::optional<double> v) {
  return v.has_value() ? absl::StrFormat("%.6g", *v) : "-";
}

}  // namespace

bool NamesASeries(const std::vector<std::string>& args) {
  for (const std::string& a : args) {
    if (!ParseRunId(a).ok()) return true;
  }
  return false;
}

int ReportComparisonCommand(const ParsedArgs& args, RunClient& client, Io& io) {
  const std::string library_path = args.Has("chart-library")
                                       ? args.Get("chart-library")
                                       : http::kDefaultChartLibrary;
  absl::StatusOr<std::string> library = http::LoadChartLibrary(library_path);
  if (!library.ok()) return UsageFailure(library.status(), "report", io);
  absl::StatusOr<std::vector<CompareGroup>> groups =
      LoadCompareGroups(args.positionals, client);
  if (!groups.ok()) {
    if (absl::IsInvalidArgument(groups.status())) {
      return UsageFailure(groups.status(), "report", io);
    }
    return ReportError(groups.status(), io);
  }
  const std::vector<uint64_t> checkpoints = DefaultCheckpoints(*groups);
  if (checkpoints.empty()) {
    *io.err << "skerry: no run compared has completed a generation yet\n";
    return kExitFailure;
  }
  const std::string page = RenderComparePage(
      *groups, FormatComparison(*groups, checkpoints, std::nullopt), *library,
      absl::FormatTime("%Y-%m-%d %H:%M:%S UTC", absl::Now(),
                       absl::UTCTimeZone()));
  const std::string out = args.Get("out");
  const std::string partial = out + ".partial";
  {
    std::ofstream file(partial, std::ios::binary | std::ios::trunc);
    file << page;
    file.close();
    if (!file || std::rename(partial.c_str(), out.c_str()) != 0) {
      std::remove(partial.c_str());
      return ReportError(
          absl::PermissionDeniedError(
              absl::StrCat("cannot write ", out,
                           " (does its folder exist, and may you write it?)")),
          io);
    }
  }
  size_t runs = 0;
  for (const CompareGroup& g : *groups) runs += g.run_ids.size();
  *io.out << "wrote " << out << " (" << page.size() << " bytes, comparison of "
          << groups->size() << " groups, " << runs << " runs)\n";
  return kExitOk;
}

std::string RenderComparePage(const std::vector<CompareGroup>& groups,
                              const std::string& comparison,
                              absl::string_view chart_library,
                              absl::string_view generated) {
  uint64_t longest = 0;
  for (const CompareGroup& g : groups) {
    for (const BestCurve& c : g.curves) {
      if (!c.empty()) longest = std::max(longest, c.back().first);
    }
  }
  std::vector<uint64_t> grid;
  for (int k = 1; k <= kComparePoints && longest > 0; ++k) {
    const uint64_t at = longest * static_cast<uint64_t>(k) / kComparePoints;
    if (at > 0 && (grid.empty() || at > grid.back())) grid.push_back(at);
  }
  std::vector<Band> bands;
  for (const CompareGroup& g : groups) bands.push_back(BandOf(g, grid));

  std::string json = "{\"evaluations\":[";
  for (size_t j = 0; j < grid.size(); ++j) {
    absl::StrAppend(&json, j ? "," : "", grid[j]);
  }
  json += "],\"groups\":[";
  for (size_t i = 0; i < groups.size(); ++i) {
    absl::StrAppend(&json, i ? "," : "", "{\"label\":",
                    JsonString(std::string(1, static_cast<char>('A' + i % 26)) +
                               " " + groups[i].label));
    for (const auto& [key, values] :
         {std::make_pair("median", &bands[i].median),
          std::make_pair("q1", &bands[i].q1),
          std::make_pair("q3", &bands[i].q3)}) {
      absl::StrAppend(&json, ",\"", key, "\":[");
      for (size_t j = 0; j < values->size(); ++j) {
        absl::StrAppend(&json, j ? "," : "", Json((*values)[j]));
      }
      json += "]";
    }
    json += "}";
  }
  json += "]}";

  std::string table = "<table><tr><th>evaluations</th>";
  for (size_t i = 0; i < groups.size(); ++i) {
    absl::StrAppend(
        &table, "<th>",
        http::HtmlEscape(std::string(1, 'A' + i % 26) + " " + groups[i].label),
        ": median [lower, upper quartile] (runs)</th>");
  }
  table += "</tr>\n";
  for (size_t j = 0; j < grid.size(); ++j) {
    absl::StrAppend(&table, "<tr><td>", FormatCount(grid[j]), "</td>");
    for (const Band& b : bands) {
      absl::StrAppend(&table, "<td>", Cell(b.median[j]), " [", Cell(b.q1[j]),
                      ", ", Cell(b.q3[j]), "] (", b.n[j], ")</td>");
    }
    table += "</tr>\n";
  }
  table += "</table>\n";

  return absl::StrCat(
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
      "<title>Skerry comparison</title>\n<style>",
      kStyle, "</style></head><body>\n<h1>Skerry comparison</h1>\n<p>",
      http::HtmlEscape(generated),
      "</p>\n<h2>Best score against evaluations</h2>\n<p>Solid: the median "
      "over each group's runs of the best score reached so far; dashed: the "
      "lower and upper quartiles (Hyndman &amp; Fan definition 7). A point "
      "counts only the runs that got that far.</p>\n"
      "<div class=\"chart\"><canvas id=\"skerry-compare-chart\"></canvas>"
      "</div>\n<h2>The comparison</h2>\n<pre>",
      http::HtmlEscape(comparison), "</pre>\n<h2>The curves' numbers</h2>\n",
      table, "<script type=\"application/json\" id=\"skerry-compare\">", json,
      "</script>\n<script>", chart_library, "</script>\n<script>", kScript,
      "</script>\n</body></html>\n");
}

}  // namespace skerry::cli
