#include "common/network_export.h"

#include <cstdio>

#include "absl/strings/str_cat.h"

namespace skerry {
namespace {

std::string Number(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof(buffer), "%.17g", v);
  return buffer;
}

// A JSON string literal: quotes, backslashes and control characters escaped;
// other bytes (UTF-8) as they are.
std::string Quote(const std::string& text) {
  std::string out = "\"";
  for (unsigned char c : text) {
    if (c == '"' || c == '\\') {
      out += '\\';
      out += static_cast<char>(c);
    } else if (c < 0x20) {
      char buffer[8];
      std::snprintf(buffer, sizeof(buffer), "\\u%04x", c);
      out += buffer;
    } else {
      out += static_cast<char>(c);
    }
  }
  return out + "\"";
}

std::string Row(const double* values, size_t count) {
  std::string out = "[";
  for (size_t i = 0; i < count; ++i) {
    absl::StrAppend(&out, i == 0 ? "" : ", ", Number(values[i]));
  }
  return out + "]";
}

// A matrix of `rows` rows of `cols` values, one row per line.
std::string Matrix(const std::vector<double>& values, size_t rows,
                   size_t cols) {
  std::string out = "[";
  for (size_t j = 0; j < rows; ++j) {
    absl::StrAppend(&out, j == 0 ? "\n" : ",\n", "        ",
                    Row(values.data() + j * cols, cols));
  }
  return out + "\n      ]";
}

std::string LayerJson(const Network::Layer& layer) {
  std::string out = absl::StrCat(
      "    {\n      \"size\": ", layer.size, ",\n      \"activation\": \"",
      ActivationName(layer.activation),
      "\",\n      \"recurrent\": ", layer.recurrent ? "true" : "false",
      ",\n      \"weights\": ",
      Matrix(layer.weights, layer.size, layer.fan_in));
  if (layer.recurrent) {
    absl::StrAppend(&out, ",\n      \"recurrent_weights\": ",
                    Matrix(layer.recurrent_weights, layer.size, layer.size));
  }
  if (!layer.bias.empty()) {
    absl::StrAppend(
        &out, ",\n      \"bias\": ", Row(layer.bias.data(), layer.bias.size()));
  }
  return out + "\n    }";
}

}  // namespace

std::string NetworkToJson(const Network& network, const ExportNotes& notes) {
  std::string out = absl::StrCat(
      "{\n  \"format\": \"skerry-network\",\n  \"version\": 1,\n",
      "  \"inputs\": ", network.input_count(),
      ",\n  \"biases\": ", network.biases() ? "true" : "false",
      ",\n  \"recurrent\": ", network.recurrent() ? "true" : "false",
      ",\n  \"notes\": {");
  for (size_t i = 0; i < notes.size(); ++i) {
    absl::StrAppend(&out, i == 0 ? "\n" : ",\n", "    ", Quote(notes[i].first),
                    ": ", Quote(notes[i].second));
  }
  absl::StrAppend(&out, notes.empty() ? "" : "\n  ", "},\n  \"layers\": [");
  const auto& layers = network.layers();
  for (size_t i = 0; i < layers.size(); ++i) {
    absl::StrAppend(&out, i == 0 ? "\n" : ",\n", LayerJson(layers[i]));
  }
  return out + "\n  ]\n}\n";
}

absl::StatusOr<std::string> ExportNetworkJson(
    const skerry::v1::NetworkSpec& spec, absl::Span<const double> genes,
    const ExportNotes& notes) {
  absl::StatusOr<Network> network = Network::Decode(spec, genes);
  if (!network.ok()) return network.status();
  return NetworkToJson(*network, notes);
}

}  // namespace skerry
