// Pole balancing: the single cart-pole and the double pole on a cart, their
// episodes, the 625-start generalisation test, and the built-in evaluators a
// network genome drives.
//
// Single pole: Barto, Sutton & Anderson 1983 (IEEE SMC-13:834-846),
// friction-free form, explicit Euler with tau = 0.02 s, bang-bang force +/-10
// N. With theta from upright (positive in +x), l the half-length, m the pole
// and M the cart:
//     theta'' = (g sin th - cos th (F + m l th'^2 sin th) / (M + m))
//               / (l (4/3 - m cos^2 th / (M + m)))
//     x''     = (F + m l (th'^2 sin th - theta'' cos th)) / (M + m)
//
// Double pole: Wieland 1991 constants; two uniform poles hinged on one cart;
// RK4 with dt = 0.01 s, two steps per action, force 10 u N. From the Lagrangian
// (derived here, with g = +9.8 and theta from upright):
//     x''       = (F - mu_c sgn(x') + sum Ft_i) / (M + sum mt_i)
//     Ft_i      = m_i l_i th_i'^2 sin th_i
//                 - 3/4 m_i cos th_i (g sin th_i - mu_p th_i' / (m_i l_i))
//     mt_i      = m_i (1 - 3/4 cos^2 th_i)
//     th_i''    = 3 / (4 l_i) (g sin th_i - x'' cos th_i - mu_p th_i' / (m_i
//     l_i))
// The form usually printed writes "+ g sin th" inside both brackets; it is the
// same system with the gravity constant taken as -9.8 (as the widely copied
// benchmark code does), not a different model.
//
// Invariant: every function here is a pure function of its arguments (the
// evaluators draw start noise only from the evaluation seed).
// Thread safety: free functions are thread-safe; a Controller or an evaluator
// is used by one thread at a time.
#ifndef SKERRY_COMMON_POLE_H_
#define SKERRY_COMMON_POLE_H_

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>
#include <memory>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "common/evaluator.h"
#include "common/network.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::pole {

constexpr double kPi = 3.14159265358979323846;
constexpr double kDegree = kPi / 180.0;

// ---- Single pole ----

// Barto, Sutton & Anderson 1983.
struct CartPoleParams {
  double gravity = 9.8;                 // m/s^2
  double cart_mass = 1.0;               // kg
  double pole_mass = 0.1;               // kg
  double half_length = 0.5;             // m
  double force_magnitude = 10.0;        // N
  double tau = 0.02;                    // s, one Euler step per action
  double theta_limit = 12.0 * kDegree;  // rad
  double x_limit = 2.4;                 // m
};

struct CartPoleState {
  double x = 0.0;
  double x_dot = 0.0;
  double theta = 0.0;
  double theta_dot = 0.0;
};

struct Accelerations {
  double x = 0.0;
  double theta = 0.0;
};

Accelerations CartPoleAccelerations(const CartPoleParams& p,
                                    const CartPoleState& s, double force);
// Explicit Euler: positions move with the old velocities, as in the 1983 code.
CartPoleState CartPoleStep(const CartPoleParams& p, const CartPoleState& s,
                           double force);
bool CartPoleFailed(const CartPoleParams& p, const CartPoleState& s);

// ---- Double pole ----

// Wieland 1991, as used by Gruau, Whitley & Pyeatt 1996 (from memory).
struct DoublePoleParams {
  double gravity = 9.8;                             // m/s^2
  double cart_mass = 1.0;                           // kg
  std::array<double, 2> pole_mass = {0.1, 0.01};    // kg
  std::array<double, 2> half_length = {0.5, 0.05};  // m
  double cart_friction = 0.0005;                    // mu_c
  double pole_friction = 0.000002;                  // mu_p
  double force_magnitude = 10.0;                    // N at u = 1
  double dt = 0.01;                                 // s per RK4 step
  int steps_per_action = 2;
  double angle_limit = 36.0 * kDegree;  // rad, each pole
  double x_limit = 2.4;                 // m
};

// x, x', theta_1, theta_1', theta_2, theta_2' (pole 1 is the long one).
using DoublePoleState = std::array<double, 6>;

// d(state)/dt under a constant force.
DoublePoleState DoublePoleDerivative(const DoublePoleParams& p,
                                     const DoublePoleState& s, double force);
// One classical fourth-order Runge-Kutta step of length dt.
DoublePoleState DoublePoleRk4Step(const DoublePoleParams& p,
                                  const DoublePoleState& s, double force,
                                  double dt);
// One action: steps_per_action RK4 steps of p.dt with force
// force_magnitude * u, u clamped to [-1, 1].
DoublePoleState DoublePoleAct(const DoublePoleParams& p,
                              const DoublePoleState& s, double u);
bool DoublePoleFailed(const DoublePoleParams& p, const DoublePoleState& s);
// Kinetic plus potential energy (pivot height 0), conserved when both friction
// coefficients and the force are zero:
//   E = 1/2 (M + m1 + m2) x'^2
//     + sum_i [ m_i l_i x' th_i' cos th_i + 2/3 m_i l_i^2 th_i'^2
//               + m_i g l_i cos th_i ].
double DoublePoleEnergy(const DoublePoleParams& p, const DoublePoleState& s);

// Published starts: at rest, short pole upright, long pole at 1 degree (with
// velocities) or 4.5 degrees (without).
DoublePoleState DoublePoleStart(bool hide_velocities);

// ---- Controllers and episodes ----

// Maps an observation to an action u in [-1, 1].
class Controller {
 public:
  virtual ~Controller() = default;
  virtual void Reset() = 0;
  virtual absl::StatusOr<double> Act(absl::Span<const double> observation) = 0;
};

// A network with one output o, read as u = o (tanh), 2o - 1 (logistic), or o
// clamped to [-1, 1] (linear, ReLU).
class NetworkController : public Controller {
 public:
  // InvalidArgument unless the network has exactly one output.
  static absl::StatusOr<std::unique_ptr<NetworkController>> Create(
      Network network);
  void Reset() override;
  absl::StatusOr<double> Act(absl::Span<const double> observation) override;

 private:
  explicit NetworkController(Network network);
  Network network_;
};

// Observations as the network sees them, scaled by 1/4.8, 1/2, 1/0.52, 1/2 for
// x, x', theta, theta' (common practice in the neuroevolution literature; from
// memory); without velocities, the positions and angles only.
std::vector<double> ObserveCartPole(const CartPoleState& s,
                                    bool hide_velocities);
std::vector<double> ObserveDoublePole(const DoublePoleState& s,
                                      bool hide_velocities);

struct CartPoleTask {
  CartPoleParams params;
  bool hide_velocities = false;
  bool continuous_force = false;  // else bang-bang: +F if u > 0, -F otherwise
};

struct DoublePoleTask {
  DoublePoleParams params;
  bool hide_velocities = false;
};

// What an episode did besides its score, over the states it balanced (the
// start and every state after a step that did not fail): the evaluators'
// metrics (Evaluator::LastMetrics).
struct EpisodeTrace {
  uint64_t steps = 0;            // steps balanced
  double max_pole_angle = 0.0;   // largest |theta| of any pole, radians
  double max_cart_travel = 0.0;  // largest |x|, metres
  void Note(double x, double theta) {
    max_cart_travel = std::max(max_cart_travel, std::fabs(x));
    max_pole_angle = std::max(max_pole_angle, std::fabs(theta));
  }
};

// Steps balanced from `start` before failure, at most max_steps. Resets the
// controller first. `trace`, when given, receives the episode's trace.
absl::StatusOr<uint64_t> BalanceCartPole(const CartPoleTask& task,
                                         CartPoleState start,
                                         uint64_t max_steps,
                                         Controller& controller,
                                         EpisodeTrace* trace = nullptr);
absl::StatusOr<uint64_t> BalanceDoublePole(const DoublePoleTask& task,
                                           const DoublePoleState& start,
                                           uint64_t max_steps,
                                           Controller& controller,
                                           EpisodeTrace* trace = nullptr);
// Gruau, Whitley & Pyeatt 1996 damping fitness over at most 1000 steps (from
// memory): 0.1 t / 1000 + 0.9 f2, f2 = 0 if t < 100, else 0.75 / (sum over the
// last 100 steps of |x| + |x'| + |theta_1| + |theta_1'|), SI units.
absl::StatusOr<double> DampingFitness(const DoublePoleTask& task,
                                      const DoublePoleState& start,
                                      Controller& controller,
                                      EpisodeTrace* trace = nullptr);

// ---- Generalisation test ----

constexpr uint32_t kGeneralisationStarts = 625;
constexpr uint64_t kGeneralisationSteps = 1000;
// Gruau et al. 1996 call a controller general when it balances from at least
// this many starts (from memory).
constexpr uint32_t kGeneralisationPass = 200;

// Start `index` in [0, 625): x, x', theta_1, theta_1' each take the values
// {0.05, 0.25, 0.5, 0.75, 0.95} of the ranges +/-2.16 m, +/-1.35 m/s,
// +/-3.6 degrees, +/-8.6 degrees/s (from memory); the short pole starts upright
// at rest. index = 125 a + 25 b + 5 c + d for the a-th x, b-th x', c-th theta_1
// and d-th theta_1' value. REQUIRES: index < 625.
DoublePoleState GeneralisationStart(uint32_t index);
std::vector<DoublePoleState> GeneralisationStarts();

// One held-out case of a pole evaluator spec (cart_pole or double_pole, already
// normalised): steps balanced from generalisation start `index` (the single
// pole uses its x, x', theta_1, theta_1' as x, x', theta, theta'), at most
// 1000. InvalidArgument for a bad spec, genes or index.
absl::StatusOr<uint64_t> RunGeneralisationCase(
    const skerry::v1::EvaluatorSpec& spec, absl::Span<const double> genes,
    uint32_t index);
// How many of the 625 starts the genome balances for 1000 steps.
absl::StatusOr<uint32_t> GeneralisationTest(
    const skerry::v1::EvaluatorSpec& spec, absl::Span<const double> genes);

// ---- Evaluators and their specs ----

bool IsPoleEvaluator(const skerry::v1::EvaluatorSpec& spec);
// The observation size of a pole evaluator spec (2, 3, 4 or 6); 0 otherwise.
uint32_t ObservationSize(const skerry::v1::EvaluatorSpec& spec);
// Fills the defaults documented in control.proto. No-op for other kinds.
void NormalizePoleEvaluator(skerry::v1::EvaluatorSpec* spec);
// Validates a normalised pole evaluator spec; InvalidArgument names the field
// (e.g. "evaluator.network.inputs").
absl::Status ValidatePoleEvaluator(const skerry::v1::EvaluatorSpec& spec);
// Normalises a copy of the spec, validates it, then makes the evaluator.
// Scores are maximised.
absl::StatusOr<std::unique_ptr<Evaluator>> MakePoleEvaluator(
    const skerry::v1::EvaluatorSpec& spec);

}  // namespace skerry::pole

#endif  // SKERRY_COMMON_POLE_H_
