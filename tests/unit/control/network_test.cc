// Network decoding: the weight order of common/network.h and the four
// activations, on examples computed by hand.
#include "common/network.h"

#include <cmath>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using skerry::v1::NetworkSpec;
using ::testing::HasSubstr;

NetworkSpec Spec(uint32_t inputs, std::vector<std::pair<uint32_t, int>> layers,
                 bool biases = true, bool recurrent = false) {
  NetworkSpec spec;
  spec.set_inputs(inputs);
  for (auto [size, activation] : layers) {
    auto* layer = spec.add_layers();
    layer->set_size(size);
    layer->set_activation(static_cast<skerry::v1::Activation>(activation));
  }
  spec.set_biases(biases);
  spec.set_recurrent(recurrent);
  return spec;
}

constexpr int kTanh = skerry::v1::ACTIVATION_TANH;
constexpr int kLogistic = skerry::v1::ACTIVATION_LOGISTIC;
constexpr int kRelu = skerry::v1::ACTIVATION_RELU;
constexpr int kLinear = skerry::v1::ACTIVATION_LINEAR;

std::vector<double> Step(Network& net, std::vector<double> in) {
  absl::StatusOr<absl::Span<const double>> out = net.Forward(in);
  EXPECT_TRUE(out.ok()) << out.status();
  if (!out.ok()) return {};
  return std::vector<double>(out->begin(), out->end());
}

TEST(NetworkTest, WeightCountFollowsTheLayerFormula) {
  // n * (m + (recurrent hidden ? n : 0) + (biases ? 1 : 0)) per layer.
  EXPECT_EQ(*WeightCount(Spec(6, {{1, kTanh}})), 7u);
  EXPECT_EQ(*WeightCount(Spec(6, {{1, kTanh}}, false)), 6u);
  EXPECT_EQ(*WeightCount(Spec(2, {{2, kTanh}, {1, kLogistic}})), 9u);
  // 3 inputs, recurrent hidden 5, output 1: 5*(3+5+1) + 1*(5+1) = 51.
  EXPECT_EQ(*WeightCount(Spec(3, {{5, kTanh}, {1, kTanh}}, true, true)), 51u);
  EXPECT_EQ(*WeightCount(Spec(3, {{5, kTanh}, {1, kTanh}}, false, true)), 45u);
}

TEST(NetworkTest, SingleLinearNeuronIsWeightedSumPlusBias) {
  absl::StatusOr<Network> net =
      Network::Decode(Spec(2, {{1, kLinear}}), {0.5, -1.0, 0.25});
  ASSERT_TRUE(net.ok()) << net.status();
  // 0.5 * 2 - 1 * 3 + 0.25 = -1.75 (by hand).
  EXPECT_EQ(Step(*net, {2.0, 3.0}), std::vector<double>{-1.75});
}

TEST(NetworkTest, GenesAreReadNeuronByNeuronWithTheBiasLast) {
  // Genes 0..7 for 3 inputs and 2 linear neurons: neuron 0 = w(0,1,2) b(3),
  // neuron 1 = w(4,5,6) b(7).
  std::vector<double> genes = {10, 11, 12, 13, 20, 21, 22, 23};
  absl::StatusOr<Network> net = Network::Decode(Spec(3, {{2, kLinear}}), genes);
  ASSERT_TRUE(net.ok()) << net.status();
  EXPECT_EQ(net->layers()[0].weights,
            (std::vector<double>{10, 11, 12, 20, 21, 22}));
  EXPECT_EQ(net->layers()[0].bias, (std::vector<double>{13, 23}));
  // Unit input i gives w[j][i] + b[j].
  EXPECT_EQ(Step(*net, {1, 0, 0}), (std::vector<double>{23, 43}));
  EXPECT_EQ(Step(*net, {0, 0, 1}), (std::vector<double>{25, 45}));
  EXPECT_EQ(Step(*net, {0, 0, 0}), (std::vector<double>{13, 23}));
}

TEST(NetworkTest, HiddenTanhThenLogisticOutputMatchesHandComputation) {
  // h0 = tanh(1*0.5 + 0*(-0.5) + 0) = tanh(0.5) = 0.46211715726000974,
  // h1 = tanh(0*0.5 + 1*(-0.5) + 0.5) = 0,
  // out = 1 / (1 + exp(-(h0 - h1))) = 0.6135163043587272 (by hand, 16 digits).
  absl::StatusOr<Network> net = Network::Decode(
      Spec(2, {{2, kTanh}, {1, kLogistic}}), {1, 0, 0, 0, 1, 0.5, 1, -1, 0});
  ASSERT_TRUE(net.ok()) << net.status();
  std::vector<double> out = Step(*net, {0.5, -0.5});
  ASSERT_EQ(out.size(), 1u);
  EXPECT_NEAR(out[0], 0.6135163043587272, 1e-15);
}

TEST(NetworkTest, ReluCutsNegativeSums) {
  absl::StatusOr<Network> net =
      Network::Decode(Spec(1, {{2, kRelu}}, false), {1.0, -1.0});
  ASSERT_TRUE(net.ok()) << net.status();
  EXPECT_EQ(Step(*net, {3.0}), (std::vector<double>{3.0, 0.0}));
  EXPECT_EQ(Step(*net, {-2.0}), (std::vector<double>{0.0, 2.0}));
}

TEST(NetworkTest, ActivationsMatchTheirDefinitions) {
  // tanh, logistic 1/(1+e^-a), max(0,a), identity (common practice).
  EXPECT_DOUBLE_EQ(Activate(skerry::v1::ACTIVATION_TANH, 1.0), std::tanh(1.0));
  EXPECT_DOUBLE_EQ(Activate(skerry::v1::ACTIVATION_LOGISTIC, 0.0), 0.5);
  EXPECT_NEAR(Activate(skerry::v1::ACTIVATION_LOGISTIC, 2.0),
              0.8807970779778823, 1e-15);
  EXPECT_EQ(Activate(skerry::v1::ACTIVATION_RELU, -0.1), 0.0);
  EXPECT_EQ(Activate(skerry::v1::ACTIVATION_LINEAR, -0.1), -0.1);
}

TEST(NetworkTest, ElmanHiddenStateFeedsBackAndResetsToZero) {
  // 1 input -> recurrent linear hidden neuron (w = 1, r = 0.5) -> linear output
  // (w = 2), no biases: h_t = x_t + 0.5 h_{t-1}, y_t = 2 h_t.
  absl::StatusOr<Network> net = Network::Decode(
      Spec(1, {{1, kLinear}, {1, kLinear}}, false, true), {1.0, 0.5, 2.0});
  ASSERT_TRUE(net.ok()) << net.status();
  EXPECT_EQ(Step(*net, {1.0}), std::vector<double>{2.0});
  EXPECT_EQ(Step(*net, {0.0}), std::vector<double>{1.0});
  EXPECT_EQ(Step(*net, {0.0}), std::vector<double>{0.5});
  net->Reset();
  EXPECT_EQ(Step(*net, {0.0}), std::vector<double>{0.0});
}

TEST(NetworkTest, RecurrentWeightsComeAfterTheInputWeightsOfEachNeuron) {
  // Hidden layer of 2, 1 input, biases: neuron j = w, r0, r1, b.
  absl::StatusOr<Network> net =
      Network::Decode(Spec(1, {{2, kLinear}, {1, kLinear}}, true, true),
                      {1, 2, 3, 4, 5, 6, 7, 8, /*output*/ 9, 10, 11});
  ASSERT_TRUE(net.ok()) << net.status();
  const Network::Layer& hidden = net->layers()[0];
  EXPECT_EQ(hidden.weights, (std::vector<double>{1, 5}));
  EXPECT_EQ(hidden.recurrent_weights, (std::vector<double>{2, 3, 6, 7}));
  EXPECT_EQ(hidden.bias, (std::vector<double>{4, 8}));
  EXPECT_FALSE(net->layers()[1].recurrent);
  EXPECT_EQ(net->layers()[1].weights, (std::vector<double>{9, 10}));
}

TEST(NetworkTest, WrongGeneCountNamesBothNumbers) {
  absl::StatusOr<Network> net =
      Network::Decode(Spec(2, {{1, kLinear}}), {1.0, 2.0});
  ASSERT_FALSE(net.ok());
  EXPECT_EQ(net.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(net.status().message(), HasSubstr("2 genes"));
  EXPECT_THAT(net.status().message(), HasSubstr("needs 3 weights"));
}

TEST(NetworkTest, NonFiniteGeneIsRejectedWithItsIndex) {
  absl::StatusOr<Network> net =
      Network::Decode(Spec(2, {{1, kLinear}}), {1.0, NAN, 0.0});
  ASSERT_FALSE(net.ok());
  EXPECT_THAT(net.status().message(), HasSubstr("gene 1"));
}

TEST(NetworkTest, WrongInputCountIsAnErrorNotACrash) {
  absl::StatusOr<Network> net =
      Network::Decode(Spec(2, {{1, kLinear}}), {1.0, 1.0, 0.0});
  ASSERT_TRUE(net.ok());
  std::vector<double> three = {1, 2, 3};
  EXPECT_FALSE(net->Forward(three).ok());
}

TEST(NetworkTest, BadSpecsNameTheField) {
  struct Case {
    NetworkSpec spec;
    const char* field;
  };
  NetworkSpec no_layers = Spec(2, {});
  NetworkSpec zero_size = Spec(2, {{0, kTanh}});
  NetworkSpec unspecified = Spec(2, {{3, kTanh}, {1, 0}});
  NetworkSpec lone_recurrent = Spec(2, {{1, kTanh}}, true, true);
  NetworkSpec no_inputs = Spec(0, {{1, kTanh}});
  const Case cases[] = {
      {no_layers, "net.layers:"},
      {zero_size, "net.layers[0].size:"},
      {unspecified, "net.layers[1].activation:"},
      {lone_recurrent, "net.recurrent:"},
      {no_inputs, "net.inputs:"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.field);
    absl::Status s = ValidateNetworkSpec(c.spec, "net");
    EXPECT_EQ(s.code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(s.message(), HasSubstr(c.field));
  }
}

}  // namespace
}  // namespace skerry
