#include "common/pole.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <utility>

#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "common/episodes.h"
#include "common/random.h"

namespace skerry::pole {
namespace {

using skerry::v1::EvaluatorSpec;

double Sign(double v) { return v > 0.0 ? 1.0 : (v < 0.0 ? -1.0 : 0.0); }

double Clamp1(double u) { return std::max(-1.0, std::min(1.0, u)); }

// ---- Spec helpers ----

absl::Status Bad(absl::string_view path, absl::string_view what,
                 absl::string_view allowed, absl::string_view got) {
  return absl::InvalidArgumentError(absl::StrCat(
      path, ": ", what, " (allowed: ", allowed, "; got ", got, ")"));
}

constexpr uint64_t kDefaultMaxSteps = 100000;
constexpr uint64_t kMaxMaxSteps = 10000000;
constexpr uint32_t kMaxEpisodes = 1000;
constexpr uint32_t kDefaultHiddenNeurons = 5;

bool HidesVelocities(const EvaluatorSpec& spec) {
  return spec.kind_case() == EvaluatorSpec::kCartPole
             ? spec.cart_pole().hide_velocities()
             : spec.double_pole().hide_velocities();
}

void NormalizeNetwork(bool hide_velocities, uint32_t inputs,
                      skerry::v1::NetworkSpec* net) {
  if (net->inputs() == 0) net->set_inputs(inputs);
  if (net->layers_size() == 0) {
    if (hide_velocities || net->recurrent()) {
      auto* hidden = net->add_layers();
      hidden->set_size(kDefaultHiddenNeurons);
      net->set_recurrent(true);
    }
    net->add_layers()->set_size(1);
  }
  for (auto& layer : *net->mutable_layers()) {
    if (layer.activation() == skerry::v1::ACTIVATION_UNSPECIFIED) {
      layer.set_activation(skerry::v1::ACTIVATION_TANH);
    }
  }
  if (!net->has_biases()) net->set_biases(true);
}

absl::Status CheckEpisodes(const skerry::v1::EpisodeSpec& e) {
  if (e.count() < 1 || e.count() > kMaxEpisodes) {
    return Bad("evaluator.episodes.count", "out of range",
               absl::StrCat("[1, ", kMaxEpisodes, "]"),
               absl::StrCat(e.count()));
  }
  if (e.aggregate() != skerry::v1::AGGREGATE_MEAN &&
      e.aggregate() != skerry::v1::AGGREGATE_MIN &&
      e.aggregate() != skerry::v1::AGGREGATE_MEDIAN) {
    return Bad("evaluator.episodes.aggregate", "unknown or unspecified value",
               "AGGREGATE_MEAN, AGGREGATE_MIN, AGGREGATE_MEDIAN",
               absl::StrCat(static_cast<int>(e.aggregate())));
  }
  if (!(e.start_noise() >= 0.0 && e.start_noise() <= 1.0)) {
    return Bad("evaluator.episodes.start_noise", "out of range", "[0, 1]",
               absl::StrCat(e.start_noise()));
  }
  return absl::OkStatus();
}

absl::Status CheckMaxSteps(absl::string_view path, uint64_t steps) {
  if (steps >= 1 && steps <= kMaxMaxSteps) return absl::OkStatus();
  return Bad(path, "out of range", absl::StrCat("[1, ", kMaxMaxSteps, "]"),
             absl::StrCat(steps));
}

// Start-noise half ranges: those of the generalisation test.
constexpr double kHalfX = 2.16;
constexpr double kHalfXDot = 1.35;
constexpr double kHalfTheta = 3.6 * kDegree;
constexpr double kHalfThetaDot = 8.6 * kDegree;

// Offsets for x, x', theta, theta' of episode `episode` (see EpisodeSpec).
std::array<double, 4> StartNoise(uint64_t seed, uint32_t episode,
                                 double noise) {
  RandomStream stream = EpisodeStream(seed, episode);
  std::array<double, 4> out;
  const double half[4] = {kHalfX, kHalfXDot, kHalfTheta, kHalfThetaDot};
  for (int k = 0; k < 4; ++k) out[k] = noise * half[k] * stream.Uniform(-1, 1);
  return out;
}

CartPoleTask MakeCartPoleTask(const EvaluatorSpec& spec) {
  CartPoleTask task;
  task.hide_velocities = spec.cart_pole().hide_velocities();
  task.continuous_force = spec.cart_pole().continuous_force();
  return task;
}

DoublePoleTask MakeDoublePoleTask(const EvaluatorSpec& spec) {
  DoublePoleTask task;
  task.hide_velocities = spec.double_pole().hide_velocities();
  return task;
}

absl::StatusOr<std::unique_ptr<NetworkController>> MakeController(
    const EvaluatorSpec& spec, absl::Span<const double> genes) {
  absl::StatusOr<Network> net = Network::Decode(spec.network(), genes);
  if (!net.ok()) return net.status();
  return NetworkController::Create(*std::move(net));
}

class PoleEvaluator : public Evaluator {
 public:
  explicit PoleEvaluator(EvaluatorSpec spec) : spec_(std::move(spec)) {}

  absl::StatusOr<double> Evaluate(absl::Span<const double> genes,
                                  uint64_t seed) override {
    absl::StatusOr<std::unique_ptr<NetworkController>> controller =
        MakeController(spec_, genes);
    if (!controller.ok()) return controller.status();
    const auto& episodes = spec_.episodes();
    std::vector<double> scores;
    metrics_.clear();
    // Each metric is the mean over the episodes, as for external evaluators.
    double steps = 0.0, angle = 0.0, travel = 0.0;
    for (uint32_t e = 0; e < episodes.count(); ++e) {
      EpisodeTrace trace;
      absl::StatusOr<double> score = Episode(
          StartNoise(seed, e, episodes.start_noise()), **controller, &trace);
      if (!score.ok()) return score.status();
      scores.push_back(*score);
      steps += static_cast<double>(trace.steps);
      angle += trace.max_pole_angle;
      travel += trace.max_cart_travel;
    }
    if (episodes.count() > 0) {
      const double n = episodes.count();
      constexpr double kDegrees = 180.0 / 3.14159265358979323846;
      metrics_["steps_balanced"] = steps / n;
      metrics_["max_pole_angle_deg"] = angle / n * kDegrees;
      metrics_["max_cart_travel_m"] = travel / n;
    }
    return AggregateEpisodes(episodes.aggregate(), std::move(scores));
  }

  const std::map<std::string, double>& LastMetrics() const override {
    return metrics_;
  }

  // Case "start-<i>": 1 when the controller balances from generalisation
  // start i for 1000 steps, else 0 (common/validation.h).
  absl::StatusOr<double> EvaluateCase(absl::Span<const double> genes,
                                      const std::string& case_name,
                                      uint64_t) override {
    uint32_t index = 0;
    if (!absl::StartsWith(case_name, "start-") ||
        !absl::SimpleAtoi(absl::string_view(case_name).substr(6), &index)) {
      return absl::InvalidArgumentError(
          absl::StrCat("validation case \"", case_name,
                       "\": pole evaluators know the cases start-0 ... start-",
                       kGeneralisationStarts - 1));
    }
    absl::StatusOr<uint64_t> steps = RunGeneralisationCase(spec_, genes, index);
    if (!steps.ok()) return steps.status();
    return *steps >= kGeneralisationSteps ? 1.0 : 0.0;
  }

 private:
  absl::StatusOr<double> Episode(const std::array<double, 4>& noise,
                                 Controller& controller, EpisodeTrace* trace) {
    if (spec_.kind_case() == EvaluatorSpec::kCartPole) {
      CartPoleState start{noise[0], noise[1], noise[2], noise[3]};
      absl::StatusOr<uint64_t> steps =
          BalanceCartPole(MakeCartPoleTask(spec_), start,
                          spec_.cart_pole().max_steps(), controller, trace);
      if (!steps.ok()) return steps.status();
      return static_cast<double>(*steps);
    }
    const DoublePoleTask task = MakeDoublePoleTask(spec_);
    DoublePoleState start = DoublePoleStart(task.hide_velocities);
    for (int k = 0; k < 4; ++k) start[k] += noise[k];
    if (spec_.double_pole().fitness() == skerry::v1::GRUAU_DAMPING) {
      return DampingFitness(task, start, controller, trace);
    }
    absl::StatusOr<uint64_t> steps = BalanceDoublePole(
        task, start, spec_.double_pole().max_steps(), controller, trace);
    if (!steps.ok()) return steps.status();
    return static_cast<double>(*steps);
  }

  const EvaluatorSpec spec_;
  std::map<std::string, double> metrics_;  // of the last Evaluate
};

}  // namespace

// ---- Single pole ----

Accelerations CartPoleAccelerations(const CartPoleParams& p,
                                    const CartPoleState& s, double force) {
  const double total = p.cart_mass + p.pole_mass;
  const double sin_t = std::sin(s.theta);
  const double cos_t = std::cos(s.theta);
  const double ml = p.pole_mass * p.half_length;
  const double temp = (force + ml * s.theta_dot * s.theta_dot * sin_t) / total;
  Accelerations a;
  a.theta = (p.gravity * sin_t - cos_t * temp) /
            (p.half_length * (4.0 / 3.0 - p.pole_mass * cos_t * cos_t / total));
  a.x = temp - ml * a.theta * cos_t / total;
  return a;
}

CartPoleState CartPoleStep(const CartPoleParams& p, const CartPoleState& s,
                           double force) {
  const Accelerations a = CartPoleAccelerations(p, s, force);
  CartPoleState n;
  n.x = s.x + p.tau * s.x_dot;
  n.x_dot = s.x_dot + p.tau * a.x;
  n.theta = s.theta + p.tau * s.theta_dot;
  n.theta_dot = s.theta_dot + p.tau * a.theta;
  return n;
}

bool CartPoleFailed(const CartPoleParams& p, const CartPoleState& s) {
  return !(std::fabs(s.x) <= p.x_limit && std::fabs(s.theta) <= p.theta_limit);
}

// ---- Double pole ----

DoublePoleState DoublePoleDerivative(const DoublePoleParams& p,
                                     const DoublePoleState& s, double force) {
  double forces = force - p.cart_friction * Sign(s[1]);
  double mass = p.cart_mass;
  std::array<double, 2> sin_t, cos_t, hinge;
  for (int i = 0; i < 2; ++i) {
    const double th = s[2 + 2 * i];
    const double th_dot = s[3 + 2 * i];
    const double m = p.pole_mass[i];
    const double l = p.half_length[i];
    sin_t[i] = std::sin(th);
    cos_t[i] = std::cos(th);
    hinge[i] = p.pole_friction * th_dot / (m * l);
    forces += m * l * th_dot * th_dot * sin_t[i] -
              0.75 * m * cos_t[i] * (p.gravity * sin_t[i] - hinge[i]);
    mass += m * (1.0 - 0.75 * cos_t[i] * cos_t[i]);
  }
  const double x_acc = forces / mass;
  DoublePoleState d;
  d[0] = s[1];
  d[1] = x_acc;
  for (int i = 0; i < 2; ++i) {
    d[2 + 2 * i] = s[3 + 2 * i];
    d[3 + 2 * i] = 0.75 / p.half_length[i] *
                   (p.gravity * sin_t[i] - x_acc * cos_t[i] - hinge[i]);
  }
  return d;
}

DoublePoleState DoublePoleRk4Step(const DoublePoleParams& p,
                                  const DoublePoleState& s, double force,
                                  double dt) {
  auto along = [](const DoublePoleState& y, const DoublePoleState& k,
                  double h) {
    DoublePoleState out;
    for (int i = 0; i < 6; ++i) out[i] = y[i] + h * k[i];
    return out;
  };
  const DoublePoleState k1 = DoublePoleDerivative(p, s, force);
  const DoublePoleState k2 =
      DoublePoleDerivative(p, along(s, k1, dt / 2), force);
  const DoublePoleState k3 =
      DoublePoleDerivative(p, along(s, k2, dt / 2), force);
  const DoublePoleState k4 = DoublePoleDerivative(p, along(s, k3, dt), force);
  DoublePoleState out;
  for (int i = 0; i < 6; ++i) {
    out[i] = s[i] + dt / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
  }
  return out;
}

DoublePoleState DoublePoleAct(const DoublePoleParams& p,
                              const DoublePoleState& s, double u) {
  const double force = p.force_magnitude * Clamp1(u);
  DoublePoleState state = s;
  for (int i = 0; i < p.steps_per_action; ++i) {
    state = DoublePoleRk4Step(p, state, force, p.dt);
  }
  return state;
}

bool DoublePoleFailed(const DoublePoleParams& p, const DoublePoleState& s) {
  return !(std::fabs(s[0]) <= p.x_limit && std::fabs(s[2]) <= p.angle_limit &&
           std::fabs(s[4]) <= p.angle_limit);
}

double DoublePoleEnergy(const DoublePoleParams& p, const DoublePoleState& s) {
  const double x_dot = s[1];
  double e =
      0.5 * (p.cart_mass + p.pole_mass[0] + p.pole_mass[1]) * x_dot * x_dot;
  for (int i = 0; i < 2; ++i) {
    const double m = p.pole_mass[i];
    const double l = p.half_length[i];
    const double th = s[2 + 2 * i];
    const double w = s[3 + 2 * i];
    e += m * l * x_dot * w * std::cos(th) + 2.0 / 3.0 * m * l * l * w * w +
         m * p.gravity * l * std::cos(th);
  }
  return e;
}

DoublePoleState DoublePoleStart(bool hide_velocities) {
  return {0.0, 0.0, (hide_velocities ? 4.5 : 1.0) * kDegree, 0.0, 0.0, 0.0};
}

// ---- Controllers and episodes ----

NetworkController::NetworkController(Network network)
    : network_(std::move(network)) {}

absl::StatusOr<std::unique_ptr<NetworkController>> NetworkController::Create(
    Network network) {
  if (network.output_count() != 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("network: a pole controller needs exactly 1 output (got ",
                     network.output_count(), ")"));
  }
  return std::unique_ptr<NetworkController>(
      new NetworkController(std::move(network)));
}

void NetworkController::Reset() { network_.Reset(); }

absl::StatusOr<double> NetworkController::Act(
    absl::Span<const double> observation) {
  absl::StatusOr<absl::Span<const double>> out = network_.Forward(observation);
  if (!out.ok()) return out.status();
  const double o = (*out)[0];
  switch (network_.layers().back().activation) {
    case skerry::v1::ACTIVATION_TANH:
      return o;
    case skerry::v1::ACTIVATION_LOGISTIC:
      return 2.0 * o - 1.0;
    default:
      return Clamp1(o);
  }
}

std::vector<double> ObserveCartPole(const CartPoleState& s,
                                    bool hide_velocities) {
  if (hide_velocities) return {s.x / 4.8, s.theta / 0.52};
  return {s.x / 4.8, s.x_dot / 2.0, s.theta / 0.52, s.theta_dot / 2.0};
}

std::vector<double> ObserveDoublePole(const DoublePoleState& s,
                                      bool hide_velocities) {
  if (hide_velocities) return {s[0] / 4.8, s[2] / 0.52, s[4] / 0.52};
  return {s[0] / 4.8, s[1] / 2.0,  s[2] / 0.52,
          s[3] / 2.0, s[4] / 0.52, s[5] / 2.0};
}

absl::StatusOr<uint64_t> BalanceCartPole(const CartPoleTask& task,
                                         CartPoleState start,
                                         uint64_t max_steps,
                                         Controller& controller,
                                         EpisodeTrace* trace) {
  EpisodeTrace local;
  if (trace == nullptr) trace = &local;
  *trace = EpisodeTrace();
  controller.Reset();
  CartPoleState s = start;
  if (CartPoleFailed(task.params, s)) return 0;
  trace->Note(s.x, s.theta);
  for (uint64_t t = 0; t < max_steps; ++t) {
    absl::StatusOr<double> u =
        controller.Act(ObserveCartPole(s, task.hide_velocities));
    if (!u.ok()) return u.status();
    const double f = task.params.force_magnitude;
    const double force =
        task.continuous_force ? f * Clamp1(*u) : (*u > 0.0 ? f : -f);
    s = CartPoleStep(task.params, s, force);
    if (CartPoleFailed(task.params, s)) return t;
    trace->Note(s.x, s.theta);
    trace->steps = t + 1;
  }
  return max_steps;
}

absl::StatusOr<uint64_t> BalanceDoublePole(const DoublePoleTask& task,
                                           const DoublePoleState& start,
                                           uint64_t max_steps,
                                           Controller& controller,
                                           EpisodeTrace* trace) {
  EpisodeTrace local;
  if (trace == nullptr) trace = &local;
  *trace = EpisodeTrace();
  controller.Reset();
  DoublePoleState s = start;
  if (DoublePoleFailed(task.params, s)) return 0;
  trace->Note(s[0], std::max(std::fabs(s[2]), std::fabs(s[4])));
  for (uint64_t t = 0; t < max_steps; ++t) {
    absl::StatusOr<double> u =
        controller.Act(ObserveDoublePole(s, task.hide_velocities));
    if (!u.ok()) return u.status();
    s = DoublePoleAct(task.params, s, *u);
    if (DoublePoleFailed(task.params, s)) return t;
    trace->Note(s[0], std::max(std::fabs(s[2]), std::fabs(s[4])));
    trace->steps = t + 1;
  }
  return max_steps;
}

absl::StatusOr<double> DampingFitness(const DoublePoleTask& task,
                                      const DoublePoleState& start,
                                      Controller& controller,
                                      EpisodeTrace* trace) {
  EpisodeTrace local;
  if (trace == nullptr) trace = &local;
  *trace = EpisodeTrace();
  constexpr uint64_t kSteps = 1000;
  constexpr size_t kWindow = 100;
  controller.Reset();
  DoublePoleState s = start;
  std::array<double, kWindow> jiggle{};  // ring buffer of the last 100 steps
  uint64_t t = 0;
  if (!DoublePoleFailed(task.params, s)) {
    trace->Note(s[0], std::max(std::fabs(s[2]), std::fabs(s[4])));
  }
  while (t < kSteps && !DoublePoleFailed(task.params, s)) {
    absl::StatusOr<double> u =
        controller.Act(ObserveDoublePole(s, task.hide_velocities));
    if (!u.ok()) return u.status();
    s = DoublePoleAct(task.params, s, *u);
    if (DoublePoleFailed(task.params, s)) break;
    jiggle[t % kWindow] =
        std::fabs(s[0]) + std::fabs(s[1]) + std::fabs(s[2]) + std::fabs(s[3]);
    ++t;
    trace->Note(s[0], std::max(std::fabs(s[2]), std::fabs(s[4])));
    trace->steps = t;
  }
  const double f1 = static_cast<double>(t) / kSteps;
  double f2 = 0.0;
  if (t >= kWindow) {
    double sum = 0.0;
    for (double j : jiggle) sum += j;
    f2 = 0.75 / std::max(sum, 1e-12);
  }
  return 0.1 * f1 + 0.9 * f2;
}

// ---- Generalisation test ----

DoublePoleState GeneralisationStart(uint32_t index) {
  constexpr double kFractions[5] = {0.05, 0.25, 0.5, 0.75, 0.95};
  const double half[4] = {kHalfX, kHalfXDot, kHalfTheta, kHalfThetaDot};
  const uint32_t digit[4] = {index / 125 % 5, index / 25 % 5, index / 5 % 5,
                             index % 5};
  DoublePoleState s{};
  for (int k = 0; k < 4; ++k) {
    s[k] = -half[k] + kFractions[digit[k]] * 2.0 * half[k];
  }
  return s;
}

std::vector<DoublePoleState> GeneralisationStarts() {
  std::vector<DoublePoleState> starts;
  for (uint32_t i = 0; i < kGeneralisationStarts; ++i) {
    starts.push_back(GeneralisationStart(i));
  }
  return starts;
}

absl::StatusOr<uint64_t> RunGeneralisationCase(const EvaluatorSpec& spec,
                                               absl::Span<const double> genes,
                                               uint32_t index) {
  if (absl::Status s = ValidatePoleEvaluator(spec); !s.ok()) return s;
  if (index >= kGeneralisationStarts) {
    return Bad("generalisation case", "no such start",
               absl::StrCat("[0, ", kGeneralisationStarts - 1, "]"),
               absl::StrCat(index));
  }
  absl::StatusOr<std::unique_ptr<NetworkController>> controller =
      MakeController(spec, genes);
  if (!controller.ok()) return controller.status();
  const DoublePoleState g = GeneralisationStart(index);
  if (spec.kind_case() == EvaluatorSpec::kCartPole) {
    return BalanceCartPole(MakeCartPoleTask(spec), {g[0], g[1], g[2], g[3]},
                           kGeneralisationSteps, **controller);
  }
  return BalanceDoublePole(MakeDoublePoleTask(spec), g, kGeneralisationSteps,
                           **controller);
}

absl::StatusOr<uint32_t> GeneralisationTest(const EvaluatorSpec& spec,
                                            absl::Span<const double> genes) {
  uint32_t balanced = 0;
  for (uint32_t i = 0; i < kGeneralisationStarts; ++i) {
    absl::StatusOr<uint64_t> steps = RunGeneralisationCase(spec, genes, i);
    if (!steps.ok()) return steps.status();
    if (*steps >= kGeneralisationSteps) ++balanced;
  }
  return balanced;
}

// ---- Evaluators and their specs ----

bool IsPoleEvaluator(const EvaluatorSpec& spec) {
  return spec.kind_case() == EvaluatorSpec::kCartPole ||
         spec.kind_case() == EvaluatorSpec::kDoublePole;
}

uint32_t ObservationSize(const EvaluatorSpec& spec) {
  if (spec.kind_case() == EvaluatorSpec::kCartPole) {
    return spec.cart_pole().hide_velocities() ? 2 : 4;
  }
  if (spec.kind_case() == EvaluatorSpec::kDoublePole) {
    return spec.double_pole().hide_velocities() ? 3 : 6;
  }
  return 0;
}

void NormalizePoleEvaluator(EvaluatorSpec* spec) {
  if (!IsPoleEvaluator(*spec)) return;
  if (spec->kind_case() == EvaluatorSpec::kCartPole) {
    auto* cp = spec->mutable_cart_pole();
    if (cp->max_steps() == 0) cp->set_max_steps(kDefaultMaxSteps);
  } else {
    auto* dp = spec->mutable_double_pole();
    if (dp->max_steps() == 0) dp->set_max_steps(kDefaultMaxSteps);
    if (dp->fitness() == skerry::v1::POLE_FITNESS_UNSPECIFIED) {
      dp->set_fitness(dp->hide_velocities() ? skerry::v1::GRUAU_DAMPING
                                            : skerry::v1::BALANCE_STEPS);
    }
  }
  NormalizeNetwork(HidesVelocities(*spec), ObservationSize(*spec),
                   spec->mutable_network());
  auto* episodes = spec->mutable_episodes();
  if (episodes->count() == 0) episodes->set_count(1);
  if (episodes->aggregate() == skerry::v1::AGGREGATE_UNSPECIFIED) {
    episodes->set_aggregate(skerry::v1::AGGREGATE_MEAN);
  }
}

absl::Status ValidatePoleEvaluator(const EvaluatorSpec& spec) {
  absl::Status s;
  if (spec.kind_case() == EvaluatorSpec::kCartPole) {
    s = CheckMaxSteps("evaluator.cart_pole.max_steps",
                      spec.cart_pole().max_steps());
  } else if (spec.kind_case() == EvaluatorSpec::kDoublePole) {
    s = CheckMaxSteps("evaluator.double_pole.max_steps",
                      spec.double_pole().max_steps());
    const auto fitness = spec.double_pole().fitness();
    if (s.ok() && fitness != skerry::v1::BALANCE_STEPS &&
        fitness != skerry::v1::GRUAU_DAMPING) {
      s = Bad("evaluator.double_pole.fitness", "unknown or unspecified value",
              "BALANCE_STEPS, GRUAU_DAMPING",
              absl::StrCat(static_cast<int>(fitness)));
    }
  } else {
    return absl::InvalidArgumentError("evaluator: not a pole evaluator");
  }
  if (s.ok()) s = ValidateNetworkSpec(spec.network(), "evaluator.network");
  const uint32_t observed = ObservationSize(spec);
  if (s.ok() && spec.network().inputs() != observed) {
    s = Bad("evaluator.network.inputs",
            "must equal the task's observation size", absl::StrCat(observed),
            absl::StrCat(spec.network().inputs()));
  }
  const int last = spec.network().layers_size() - 1;
  if (s.ok() && spec.network().layers(last).size() != 1) {
    s = Bad(absl::StrCat("evaluator.network.layers[", last, "].size"),
            "the output layer of a pole controller has one neuron", "1",
            absl::StrCat(spec.network().layers(last).size()));
  }
  if (s.ok()) s = CheckEpisodes(spec.episodes());
  return s;
}

absl::StatusOr<std::unique_ptr<Evaluator>> MakePoleEvaluator(
    const EvaluatorSpec& spec) {
  EvaluatorSpec normalised = spec;  // idempotent; NormalizeSpec did it too
  NormalizePoleEvaluator(&normalised);
  if (absl::Status s = ValidatePoleEvaluator(normalised); !s.ok()) return s;
  return std::unique_ptr<Evaluator>(new PoleEvaluator(std::move(normalised)));
}

}  // namespace skerry::pole
