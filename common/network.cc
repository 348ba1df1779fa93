#include "common/network.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "absl/strings/str_cat.h"

namespace skerry {
namespace {

using skerry::v1::Activation;
using skerry::v1::NetworkSpec;

absl::Status Bad(absl::string_view path, absl::string_view what,
                 absl::string_view allowed, absl::string_view got) {
  return absl::InvalidArgumentError(absl::StrCat(
      path, ": ", what, " (allowed: ", allowed, "; got ", got, ")"));
}

bool IsSpecified(Activation a) {
  return a == skerry::v1::ACTIVATION_TANH ||
         a == skerry::v1::ACTIVATION_LOGISTIC ||
         a == skerry::v1::ACTIVATION_RELU || a == skerry::v1::ACTIVATION_LINEAR;
}

bool BiasesOn(const NetworkSpec& spec) {
  return !spec.has_biases() || spec.biases();
}

// Genes of layer `index` (see the weight order in network.h).
uint64_t LayerWeights(const NetworkSpec& spec, int index) {
  const uint64_t n = spec.layers(index).size();
  const uint64_t m = index == 0 ? spec.inputs() : spec.layers(index - 1).size();
  const bool hidden = index + 1 < spec.layers_size();
  const uint64_t recurrent = spec.recurrent() && hidden ? n : 0;
  return n * (m + recurrent + (BiasesOn(spec) ? 1 : 0));
}

// Copies `count` genes starting at *next.
std::vector<double> Take(absl::Span<const double> genes, size_t* next,
                         size_t count) {
  std::vector<double> out(genes.begin() + *next, genes.begin() + *next + count);
  *next += count;
  return out;
}

}  // namespace

double Activate(Activation activation, double a) {
  switch (activation) {
    case skerry::v1::ACTIVATION_TANH:
      return std::tanh(a);
    case skerry::v1::ACTIVATION_LOGISTIC:
      return 1.0 / (1.0 + std::exp(-a));
    case skerry::v1::ACTIVATION_RELU:
      return a > 0.0 ? a : 0.0;
    default:
      return a;
  }
}

absl::string_view ActivationName(Activation activation) {
  switch (activation) {
    case skerry::v1::ACTIVATION_TANH:
      return "tanh";
    case skerry::v1::ACTIVATION_LOGISTIC:
      return "logistic";
    case skerry::v1::ACTIVATION_RELU:
      return "relu";
    case skerry::v1::ACTIVATION_LINEAR:
      return "linear";
    default:
      return "unspecified";
  }
}

absl::Status ValidateNetworkSpec(const NetworkSpec& spec,
                                 absl::string_view path) {
  if (spec.inputs() < 1 || spec.inputs() > kMaxNetworkInputs) {
    return Bad(absl::StrCat(path, ".inputs"), "out of range",
               absl::StrCat("[1, ", kMaxNetworkInputs, "]"),
               absl::StrCat(spec.inputs()));
  }
  const int count = spec.layers_size();
  if (count < 1 || count > static_cast<int>(kMaxNetworkLayers)) {
    return Bad(absl::StrCat(path, ".layers"), "wrong number of layers",
               absl::StrCat("[1, ", kMaxNetworkLayers,
                            "] (hidden layers, then the output layer)"),
               absl::StrCat(count));
  }
  for (int i = 0; i < count; ++i) {
    const skerry::v1::LayerSpec& layer = spec.layers(i);
    const std::string where = absl::StrCat(path, ".layers[", i, "]");
    if (layer.size() < 1 || layer.size() > kMaxLayerSize) {
      return Bad(absl::StrCat(where, ".size"), "out of range",
                 absl::StrCat("[1, ", kMaxLayerSize, "]"),
                 absl::StrCat(layer.size()));
    }
    if (!IsSpecified(layer.activation())) {
      return Bad(absl::StrCat(where, ".activation"),
                 "unknown or unspecified activation",
                 "ACTIVATION_TANH, ACTIVATION_LOGISTIC, ACTIVATION_RELU, "
                 "ACTIVATION_LINEAR",
                 absl::StrCat(static_cast<int>(layer.activation())));
    }
  }
  if (spec.recurrent() && count < 2) {
    return Bad(absl::StrCat(path, ".recurrent"),
               "Elman recurrence needs at least one hidden layer",
               "false, or two or more layers", "true with one layer");
  }
  return absl::OkStatus();
}

absl::StatusOr<uint64_t> WeightCount(const NetworkSpec& spec) {
  if (absl::Status s = ValidateNetworkSpec(spec, "network"); !s.ok()) return s;
  uint64_t total = 0;
  for (int i = 0; i < spec.layers_size(); ++i) total += LayerWeights(spec, i);
  return total;
}

absl::StatusOr<Network> Network::Decode(const NetworkSpec& spec,
                                        absl::Span<const double> genes) {
  absl::StatusOr<uint64_t> count = WeightCount(spec);
  if (!count.ok()) return count.status();
  if (genes.size() != *count) {
    return absl::InvalidArgumentError(
        absl::StrCat("network: the genome has ", genes.size(),
                     " genes but the network needs ", *count, " weights"));
  }
  for (size_t i = 0; i < genes.size(); ++i) {
    if (!std::isfinite(genes[i])) {
      return absl::InvalidArgumentError(absl::StrCat(
          "network: gene ", i, " is not finite (got ", genes[i], ")"));
    }
  }
  Network net;
  net.inputs_ = spec.inputs();
  net.biases_ = BiasesOn(spec);
  net.recurrent_ = spec.recurrent();
  size_t next = 0;
  uint32_t fan_in = spec.inputs();
  for (int i = 0; i < spec.layers_size(); ++i) {
    Layer layer;
    layer.size = spec.layers(i).size();
    layer.fan_in = fan_in;
    layer.activation = spec.layers(i).activation();
    layer.recurrent = spec.recurrent() && i + 1 < spec.layers_size();
    const uint32_t n = layer.size;
    layer.weights.reserve(static_cast<size_t>(n) * fan_in);
    for (uint32_t j = 0; j < n; ++j) {
      std::vector<double> w = Take(genes, &next, fan_in);
      layer.weights.insert(layer.weights.end(), w.begin(), w.end());
      if (layer.recurrent) {
        std::vector<double> r = Take(genes, &next, n);
        layer.recurrent_weights.insert(layer.recurrent_weights.end(), r.begin(),
                                       r.end());
      }
      if (net.biases_) layer.bias.push_back(genes[next++]);
    }
    if (layer.recurrent) layer.state.assign(n, 0.0);
    fan_in = n;
    net.layers_.push_back(std::move(layer));
  }
  return net;
}

absl::StatusOr<absl::Span<const double>> Network::Forward(
    absl::Span<const double> inputs) {
  if (inputs.size() != inputs_) {
    return absl::InvalidArgumentError(
        absl::StrCat("network: Forward got ", inputs.size(),
                     " inputs but the network takes ", inputs_));
  }
  scratch_.assign(inputs.begin(), inputs.end());
  for (Layer& layer : layers_) {
    output_.assign(layer.size, 0.0);
    for (uint32_t j = 0; j < layer.size; ++j) {
      const double* w =
          layer.weights.data() + static_cast<size_t>(j) * layer.fan_in;
      double a = 0.0;
      for (uint32_t i = 0; i < layer.fan_in; ++i) a += w[i] * scratch_[i];
      if (layer.recurrent) {
        const double* r = layer.recurrent_weights.data() +
                          static_cast<size_t>(j) * layer.size;
        for (uint32_t k = 0; k < layer.size; ++k) a += r[k] * layer.state[k];
      }
      if (biases_) a += layer.bias[j];
      output_[j] = Activate(layer.activation, a);
    }
    if (layer.recurrent) layer.state = output_;
    scratch_.swap(output_);
  }
  output_.swap(scratch_);
  return absl::Span<const double>(output_);
}

void Network::Reset() {
  for (Layer& layer : layers_) {
    std::fill(layer.state.begin(), layer.state.end(), 0.0);
  }
}

}  // namespace skerry
