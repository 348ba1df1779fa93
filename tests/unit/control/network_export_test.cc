// The JSON export read back by an independent reader: a small JSON parser and a
// forward pass written from docs/network-format.md alone, not from network.cc.
#include "common/network_export.h"

#include <cmath>
#include <cstdlib>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "common/network.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

// ---- A minimal JSON reader (RFC 8259 subset: no \u escapes beyond ASCII) ----

struct Json {
  enum Kind { kNull, kBool, kNumber, kString, kArray, kObject } kind = kNull;
  bool boolean = false;
  double number = 0.0;
  std::string text;
  std::vector<Json> items;
  std::map<std::string, Json> fields;

  const Json& operator[](const std::string& key) const {
    static const Json missing;
    auto it = fields.find(key);
    return it == fields.end() ? missing : it->second;
  }
};

class Reader {
 public:
  explicit Reader(const std::string& s) : s_(s) {}

  bool Parse(Json* out) {
    if (!Value(out)) return false;
    Space();
    return i_ == s_.size();
  }

 private:
  void Space() {
    while (i_ < s_.size() && (s_[i_] == ' ' || s_[i_] == '\n' ||
                              s_[i_] == '\t' || s_[i_] == '\r')) {
      ++i_;
    }
  }
  bool Literal(const char* word) {
    const std::string w(word);
    if (s_.compare(i_, w.size(), w) != 0) return false;
    i_ += w.size();
    return true;
  }
  bool String(std::string* out) {
    if (s_[i_] != '"') return false;
    ++i_;
    while (i_ < s_.size() && s_[i_] != '"') {
      if (s_[i_] == '\\') {
        ++i_;
        if (i_ >= s_.size()) return false;
        if (s_[i_] == 'u') {
          if (i_ + 4 >= s_.size()) return false;
          out->push_back(static_cast<char>(
              std::strtol(s_.substr(i_ + 1, 4).c_str(), nullptr, 16)));
          i_ += 5;
          continue;
        }
        out->push_back(s_[i_] == 'n' ? '\n' : s_[i_]);
        ++i_;
        continue;
      }
      out->push_back(s_[i_++]);
    }
    if (i_ >= s_.size()) return false;
    ++i_;
    return true;
  }
  bool Value(Json* out) {
    Space();
    if (i_ >= s_.size()) return false;
    const char c = s_[i_];
    if (c == '{') return Object(out);
    if (c == '[') return Array(out);
    if (c == '"') {
      out->kind = Json::kString;
      return String(&out->text);
    }
    if (Literal("true")) {
      out->kind = Json::kBool;
      out->boolean = true;
      return true;
    }
    if (Literal("false")) {
      out->kind = Json::kBool;
      return true;
    }
    if (Literal("null")) return true;
    const char* begin = s_.c_str() + i_;
    char* end = nullptr;
    out->number = std::strtod(begin, &end);
    if (end == begin) return false;
    out->kind = Json::kNumber;
    i_ += static_cast<size_t>(end - begin);
    return true;
  }
  bool Array(Json* out) {
    out->kind = Json::kArray;
    ++i_;
    Space();
    if (i_ < s_.size() && s_[i_] == ']') return ++i_, true;
    while (true) {
      Json item;
      if (!Value(&item)) return false;
      out->items.push_back(std::move(item));
      Space();
      if (i_ >= s_.size()) return false;
      if (s_[i_] == ']') return ++i_, true;
      if (s_[i_++] != ',') return false;
    }
  }
  bool Object(Json* out) {
    out->kind = Json::kObject;
    ++i_;
    Space();
    if (i_ < s_.size() && s_[i_] == '}') return ++i_, true;
    while (true) {
      Space();
      std::string key;
      if (i_ >= s_.size() || !String(&key)) return false;
      Space();
      if (i_ >= s_.size() || s_[i_++] != ':') return false;
      Json value;
      if (!Value(&value)) return false;
      out->fields[key] = std::move(value);
      Space();
      if (i_ >= s_.size()) return false;
      if (s_[i_] == '}') return ++i_, true;
      if (s_[i_++] != ',') return false;
    }
  }

  const std::string& s_;
  size_t i_ = 0;
};

// ---- The forward pass as docs/network-format.md states it ----

double Act(const std::string& name, double a) {
  if (name == "tanh") return std::tanh(a);
  if (name == "logistic") return 1.0 / (1.0 + std::exp(-a));
  if (name == "relu") return a > 0 ? a : 0;
  return a;  // "linear"
}

class DocNetwork {
 public:
  explicit DocNetwork(const Json& doc) : doc_(doc) {
    for (const Json& layer : doc["layers"].items) {
      state_.emplace_back(static_cast<size_t>(layer["size"].number), 0.0);
    }
  }
  std::vector<double> Step(std::vector<double> in) {
    for (size_t l = 0; l < doc_["layers"].items.size(); ++l) {
      const Json& layer = doc_["layers"].items[l];
      std::vector<double> out;
      for (size_t j = 0; j < layer["weights"].items.size(); ++j) {
        double a = 0.0;
        const Json& row = layer["weights"].items[j];
        for (size_t i = 0; i < row.items.size(); ++i) {
          a += row.items[i].number * in[i];
        }
        if (layer["recurrent"].boolean) {
          const Json& r = layer["recurrent_weights"].items[j];
          for (size_t k = 0; k < r.items.size(); ++k) {
            a += r.items[k].number * state_[l][k];
          }
        }
        if (doc_["biases"].boolean) a += layer["bias"].items[j].number;
        out.push_back(Act(layer["activation"].text, a));
      }
      if (layer["recurrent"].boolean) state_[l] = out;
      in = out;
    }
    return in;
  }

 private:
  const Json& doc_;
  std::vector<std::vector<double>> state_;
};

skerry::v1::NetworkSpec RecurrentSpec() {
  skerry::v1::NetworkSpec spec;
  spec.set_inputs(3);
  spec.set_biases(true);
  spec.set_recurrent(true);
  const skerry::v1::Activation acts[] = {skerry::v1::ACTIVATION_TANH,
                                         skerry::v1::ACTIVATION_RELU,
                                         skerry::v1::ACTIVATION_LOGISTIC};
  const uint32_t sizes[] = {4, 3, 2};
  for (int i = 0; i < 3; ++i) {
    auto* layer = spec.add_layers();
    layer->set_size(sizes[i]);
    layer->set_activation(acts[i]);
  }
  return spec;
}

// Deterministic genes with varied signs and magnitudes.
std::vector<double> Genes(size_t n) {
  std::vector<double> genes;
  for (size_t i = 0; i < n; ++i) {
    genes.push_back(std::sin(1.7 * static_cast<double>(i) + 0.3) * 2.5 / 3.0);
  }
  return genes;
}

TEST(NetworkExportTest, IndependentReaderComputesTheSameOutputs) {
  const skerry::v1::NetworkSpec spec = RecurrentSpec();
  const std::vector<double> genes = Genes(*WeightCount(spec));
  absl::StatusOr<std::string> json =
      ExportNetworkJson(spec, genes, {{"run", "two-link \"rig\"\n"}});
  ASSERT_TRUE(json.ok()) << json.status();
  Json doc;
  ASSERT_TRUE(Reader(*json).Parse(&doc)) << *json;
  EXPECT_EQ(doc["format"].text, "skerry-network");
  EXPECT_EQ(doc["version"].number, 1);
  EXPECT_EQ(doc["notes"]["run"].text, "two-link \"rig\"\n");
  ASSERT_EQ(doc["layers"].items.size(), 3u);
  EXPECT_FALSE(doc["layers"].items[2]["recurrent"].boolean);

  absl::StatusOr<Network> net = Network::Decode(spec, genes);
  ASSERT_TRUE(net.ok());
  DocNetwork reader(doc);
  for (int t = 0; t < 6; ++t) {  // several steps exercise the recurrence
    SCOPED_TRACE(t);
    std::vector<double> in = {0.3 * t - 0.5, std::cos(t), 1.0 - 0.1 * t};
    absl::StatusOr<absl::Span<const double>> ours = net->Forward(in);
    ASSERT_TRUE(ours.ok());
    std::vector<double> theirs = reader.Step(in);
    ASSERT_EQ(theirs.size(), ours->size());
    for (size_t k = 0; k < theirs.size(); ++k) {
      EXPECT_NEAR(theirs[k], (*ours)[k], 1e-14);
    }
  }
}

TEST(NetworkExportTest, WeightsRoundTripExactly) {
  skerry::v1::NetworkSpec spec;
  spec.set_inputs(2);
  spec.add_layers()->set_size(1);
  spec.mutable_layers(0)->set_activation(skerry::v1::ACTIVATION_LINEAR);
  const std::vector<double> genes = {0.1, -1.0 / 3.0, 6.02214076e23};
  absl::StatusOr<std::string> json = ExportNetworkJson(spec, genes);
  ASSERT_TRUE(json.ok());
  Json doc;
  ASSERT_TRUE(Reader(*json).Parse(&doc));
  const Json& layer = doc["layers"].items[0];
  EXPECT_EQ(layer["weights"].items[0].items[0].number, 0.1);
  EXPECT_EQ(layer["weights"].items[0].items[1].number, -1.0 / 3.0);
  EXPECT_EQ(layer["bias"].items[0].number, 6.02214076e23);
  EXPECT_EQ(layer["recurrent_weights"].kind, Json::kNull);  // absent
}

TEST(NetworkExportTest, OutputIsJsonToProtobufsParserToo) {
  const skerry::v1::NetworkSpec spec = RecurrentSpec();
  absl::StatusOr<std::string> json =
      ExportNetworkJson(spec, Genes(*WeightCount(spec)), {{"score", "1e5"}});
  ASSERT_TRUE(json.ok());
  google::protobuf::Struct parsed;
  EXPECT_TRUE(google::protobuf::util::JsonStringToMessage(*json, &parsed).ok());
  EXPECT_EQ(parsed.fields().at("inputs").number_value(), 3);
}

TEST(NetworkExportTest, NoBiasesMeansNoBiasArrays) {
  skerry::v1::NetworkSpec spec;
  spec.set_inputs(1);
  spec.set_biases(false);
  spec.add_layers()->set_size(2);
  spec.mutable_layers(0)->set_activation(skerry::v1::ACTIVATION_TANH);
  absl::StatusOr<std::string> json = ExportNetworkJson(spec, {1.0, 2.0});
  ASSERT_TRUE(json.ok());
  Json doc;
  ASSERT_TRUE(Reader(*json).Parse(&doc));
  EXPECT_FALSE(doc["biases"].boolean);
  EXPECT_EQ(doc["layers"].items[0]["bias"].kind, Json::kNull);
}

TEST(NetworkExportTest, WrongGeneCountIsAnError) {
  skerry::v1::NetworkSpec spec;
  spec.set_inputs(1);
  spec.add_layers()->set_size(1);
  spec.mutable_layers(0)->set_activation(skerry::v1::ACTIVATION_TANH);
  EXPECT_FALSE(ExportNetworkJson(spec, {1.0, 2.0, 3.0}).ok());
}

}  // namespace
}  // namespace skerry
