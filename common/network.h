// Neural networks decoded from genomes: fully connected layers with a chosen
// activation each, optional biases and optional Elman recurrence.
//
// Weight order (the genome layout; docs/network-format.md states it too):
// layers in order, first hidden layer to output layer; within a layer, neurons
// in order; for neuron j of a layer of n neurons fed by m values:
//     w[j][0 .. m-1]     weights from the previous layer's outputs (the inputs,
//                        for the first layer)
//     r[j][0 .. n-1]     recurrent hidden layers only: weights from this
//                        layer's own outputs at the previous step
//     b[j]               when biases are on
// so a layer holds n * (m + (recurrent ? n : 0) + (biases ? 1 : 0)) genes, and
// neuron j computes act(sum_i w[j][i] in[i] + sum_k r[j][k] prev[k] + b[j]).
// Every layer but the last is hidden; the output layer is never recurrent.
//
// Invariant: a Network always matches its spec: weight counts fit the layer
// sizes, every weight is finite, and recurrent state is zero after Reset().
//
// Thread safety: a Network carries recurrent state and an output buffer, so it
// is used by one thread at a time; copies are independent.
//
//   absl::StatusOr<Network> net = Network::Decode(spec, genes);
//   if (!net.ok()) return net.status();
//   net->Reset();
//   absl::StatusOr<absl::Span<const double>> out = net->Forward(observation);
#ifndef SKERRY_COMMON_NETWORK_H_
#define SKERRY_COMMON_NETWORK_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "skerry/v1/control.pb.h"

namespace skerry {

constexpr uint32_t kMaxNetworkLayers = 100;
constexpr uint32_t kMaxLayerSize = 10000;
constexpr uint32_t kMaxNetworkInputs = 10000;

// act(a) for one of the four specified activations; REQUIRES a specified value.
double Activate(skerry::v1::Activation activation, double a);

// "tanh", "logistic", "relu", "linear" (the names the JSON export uses), or
// "unspecified".
absl::string_view ActivationName(skerry::v1::Activation activation);

// Checks inputs, layer sizes, activations and recurrence. InvalidArgument names
// the field under `path` (e.g. "evaluator.network.layers[1].size: ...").
absl::Status ValidateNetworkSpec(const skerry::v1::NetworkSpec& spec,
                                 absl::string_view path);

// The genome length the spec needs (see the weight order above), after
// validating it.
absl::StatusOr<uint64_t> WeightCount(const skerry::v1::NetworkSpec& spec);

class Network {
 public:
  struct Layer {
    uint32_t size = 0;
    uint32_t fan_in = 0;  // outputs of the previous layer, or the inputs
    skerry::v1::Activation activation = skerry::v1::ACTIVATION_TANH;
    bool recurrent = false;
    std::vector<double> weights;            // size x fan_in, row j = neuron j
    std::vector<double> recurrent_weights;  // size x size, or empty
    std::vector<double> bias;               // size, or empty without biases
    std::vector<double> state;  // outputs of the previous step (recurrent)
  };

  // Validates the spec, then reads `genes` in the weight order above.
  // InvalidArgument when the gene count differs from WeightCount (both numbers
  // in the message) or a gene is not finite.
  static absl::StatusOr<Network> Decode(const skerry::v1::NetworkSpec& spec,
                                        absl::Span<const double> genes);

  // One step. The view holds the output layer's values and stays valid until
  // the next Forward or Reset. InvalidArgument when inputs.size() is not
  // input_count().
  absl::StatusOr<absl::Span<const double>> Forward(
      absl::Span<const double> inputs);

  // Zeroes the recurrent state (start of an episode).
  void Reset();

  uint32_t input_count() const { return inputs_; }
  uint32_t output_count() const { return layers_.back().size; }
  bool biases() const { return biases_; }
  bool recurrent() const { return recurrent_; }
  const std::vector<Layer>& layers() const { return layers_; }

 private:
  Network() = default;

  uint32_t inputs_ = 0;
  bool biases_ = true;
  bool recurrent_ = false;
  std::vector<Layer> layers_;
  std::vector<double> scratch_;  // the current layer's input
  std::vector<double> output_;
};

}  // namespace skerry

#endif  // SKERRY_COMMON_NETWORK_H_
