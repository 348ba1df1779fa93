// Pole balancing physics against published constants and derived behaviour.
#include "common/pole.h"

#include <cmath>
#include <set>
#include <vector>

#include "gtest/gtest.h"

namespace skerry::pole {
namespace {

TEST(PoleConstantsTest, SinglePoleHasTheBartoSuttonAnderson1983Values) {
  // Barto, Sutton & Anderson 1983, IEEE SMC-13:834-846.
  const CartPoleParams p;
  EXPECT_EQ(p.gravity, 9.8);
  EXPECT_EQ(p.cart_mass, 1.0);
  EXPECT_EQ(p.pole_mass, 0.1);
  EXPECT_EQ(p.half_length, 0.5);
  EXPECT_EQ(p.force_magnitude, 10.0);
  EXPECT_EQ(p.tau, 0.02);
  EXPECT_NEAR(p.theta_limit, 0.20943951, 1e-8);  // 12 degrees
  EXPECT_EQ(p.x_limit, 2.4);
}

TEST(PoleConstantsTest, DoublePoleHasTheWieland1991Values) {
  // Wieland 1991 as used by Gruau, Whitley & Pyeatt 1996 and Stanley &
  // Miikkulainen 2002; dt and steps per action from memory.
  const DoublePoleParams p;
  EXPECT_EQ(p.gravity, 9.8);
  EXPECT_EQ(p.cart_mass, 1.0);
  EXPECT_EQ(p.pole_mass[0], 0.1);
  EXPECT_EQ(p.pole_mass[1], 0.01);
  EXPECT_EQ(p.half_length[0], 0.5);
  EXPECT_EQ(p.half_length[1], 0.05);
  EXPECT_EQ(p.cart_friction, 0.0005);
  EXPECT_EQ(p.pole_friction, 0.000002);
  EXPECT_EQ(p.force_magnitude, 10.0);
  EXPECT_EQ(p.dt, 0.01);
  EXPECT_EQ(p.steps_per_action, 2);
  // 36 degrees; the benchmark code prints 0.628329 (from memory).
  EXPECT_NEAR(p.angle_limit, 0.628329, 2e-5);
  EXPECT_EQ(p.x_limit, 2.4);
}

TEST(PoleConstantsTest, DoublePoleStartsAsPublished) {
  // Long pole at 1 degree with velocities, 4.5 without; the rest at 0
  // (Gruau, Whitley & Pyeatt 1996).
  EXPECT_EQ(DoublePoleStart(false),
            (DoublePoleState{0, 0, 1 * kDegree, 0, 0, 0}));
  EXPECT_EQ(DoublePoleStart(true),
            (DoublePoleState{0, 0, 4.5 * kDegree, 0, 0, 0}));
}

// ---- Single pole, small angles ----
//
// Linearising the 1983 equations about the upright (sin th = th, cos th = 1,
// th'^2 = 0) with M the cart, m the pole, l the half-length:
//     th'' = (g th - F / (M + m)) / (l (4/3 - m / (M + m)))  = a th - b
//     x''  = (F - m l th'') / (M + m)
// with a = g / (l (4/3 - m/(M+m))) = 15.7756 s^-2 (sqrt(a) = 3.97185 s^-1) and
// b = F / ((M+m) l (4/3 - m/(M+m))). From rest at th0 the solution is
//     th(t) = b/a + (th0 - b/a) cosh(sqrt(a) t).

constexpr double kA = 9.8 / (0.5 * (4.0 / 3.0 - 0.1 / 1.1));

TEST(CartPoleLinearTest, AccelerationsMatchTheLinearisedEquations) {
  const CartPoleParams p;
  for (double force : {0.0, 10.0, -10.0}) {
    SCOPED_TRACE(force);
    const double th = 1e-4;
    const Accelerations acc =
        CartPoleAccelerations(p, CartPoleState{0, 0, th, 0}, force);
    const double b = force / (1.1 * 0.5 * (4.0 / 3.0 - 0.1 / 1.1));
    const double th_acc = kA * th - b;
    const double x_acc = (force - 0.1 * 0.5 * th_acc) / 1.1;
    // Nonlinear terms are O(th^2) relative: 1e-8 of the scale.
    EXPECT_NEAR(acc.theta, th_acc, 1e-7 * (std::fabs(b) + kA * th));
    EXPECT_NEAR(acc.x, x_acc, 1e-7 * (std::fabs(x_acc) + 1e-3));
  }
}

TEST(CartPoleLinearTest, FallFromSmallAngleFollowsCosh) {
  // Fine Euler steps approximate the continuous solution th0 cosh(sqrt(a) t).
  CartPoleParams p;
  p.tau = 1e-4;
  const double th0 = 1e-4;
  CartPoleState s{0, 0, th0, 0};
  for (int n = 1; n <= 10000; ++n) {  // 1 s
    s = CartPoleStep(p, s, 0.0);
    if (n % 2500 == 0) {
      const double t = n * p.tau;
      const double expected = th0 * std::cosh(std::sqrt(kA) * t);
      SCOPED_TRACE(t);
      // Euler at 1e-4 s: relative error about t tau a / 2 < 1e-3.
      EXPECT_NEAR(s.theta, expected, 1e-3 * expected);
    }
  }
}

TEST(CartPoleLinearTest, PublishedEulerStepMatchesTheLinearEulerMap) {
  // With tau = 0.02 the linear Euler map [th, w] -> [th + tau w, w + tau a th]
  // has eigenvalues 1 +/- tau sqrt(a), so from rest
  //     th_n = th0 / 2 ((1 + tau sqrt a)^n + (1 - tau sqrt a)^n).
  const CartPoleParams p;
  const double th0 = 1e-5;
  const double r = p.tau * std::sqrt(kA);
  CartPoleState s{0, 0, th0, 0};
  for (int n = 1; n <= 50; ++n) {
    s = CartPoleStep(p, s, 0.0);
    const double expected = th0 / 2 * (std::pow(1 + r, n) + std::pow(1 - r, n));
    EXPECT_NEAR(s.theta, expected, 1e-6 * expected) << "step " << n;
  }
}

TEST(CartPoleLinearTest, PushingTheCartTipsThePoleBack) {
  // th(t) = (b/a)(1 - cosh(sqrt(a) t)) from rest upright under constant F.
  // Euler moves positions with the old velocities, so from rest it lags by
  // one step: relative error about tau / t = 2e-4 here.
  CartPoleParams p;
  p.tau = 1e-5;
  const double b = 10.0 / (1.1 * 0.5 * (4.0 / 3.0 - 0.1 / 1.1));
  CartPoleState s;
  for (int n = 0; n < 5000; ++n) s = CartPoleStep(p, s, 10.0);  // 0.05 s
  const double expected = b / kA * (1 - std::cosh(std::sqrt(kA) * 0.05));
  EXPECT_LT(s.theta, 0.0);
  // Nonlinear terms at |th| = 0.018 rad: O(th^2) = 3e-4 relative.
  EXPECT_NEAR(s.theta, expected, 1e-3 * std::fabs(expected));
}

TEST(CartPoleTest, FailsPastTwelveDegreesOrTheTrackEnd) {
  const CartPoleParams p;
  EXPECT_FALSE(CartPoleFailed(p, CartPoleState{2.4, 0, 11.9 * kDegree, 0}));
  EXPECT_TRUE(CartPoleFailed(p, CartPoleState{0, 0, 12.1 * kDegree, 0}));
  EXPECT_TRUE(CartPoleFailed(p, CartPoleState{-2.41, 0, 0, 0}));
}

// ---- Double pole ----

TEST(DoublePoleTest, UprightPolesAreUnstable) {
  // A pole leaning in +x with the cart free falls further in +x.
  const DoublePoleParams p;
  const DoublePoleState d =
      DoublePoleDerivative(p, DoublePoleState{0, 0, 0.01, 0, -0.01, 0}, 0.0);
  EXPECT_GT(d[3], 0.0);
  EXPECT_LT(d[5], 0.0);
}

TEST(DoublePoleTest, SmallAngleMatchesTheSinglePoleAnalogue) {
  // The long pole alone (short pole massless) obeys the single-pole equations:
  // th'' = 3/(4l)(g th - x'' ) at small angles. Check against the 1983 form.
  DoublePoleParams p;
  p.pole_mass = {0.1, 1e-12};
  p.cart_friction = 0;
  p.pole_friction = 0;
  const CartPoleParams single;
  const double th = 0.02;
  const Accelerations a =
      CartPoleAccelerations(single, CartPoleState{0, 0, th, 0.3}, 3.0);
  const DoublePoleState d =
      DoublePoleDerivative(p, DoublePoleState{0, 0, th, 0.3, 0, 0}, 3.0);
  EXPECT_NEAR(d[1], a.x, 1e-9);
  EXPECT_NEAR(d[3], a.theta, 1e-9);
}

TEST(DoublePoleTest, EnergyIsConservedWithoutFrictionOrForce) {
  // E (see pole.h) is a constant of motion of the friction-free equations,
  // which follow from the Lagrangian L = T - V with that T and V. RK4 at
  // dt = 0.01 s drifts by O(dt^4) per unit time; over 20,000 steps (200 s)
  // of the poles swinging through the bottom the drift stays below 5e-5 of
  // the energy scale m1 g l1 = 0.49 J (measured 8.1e-6; 6x margin).
  DoublePoleParams p;
  p.cart_friction = 0;
  p.pole_friction = 0;
  DoublePoleState s = {0, 0, 10 * kDegree, 0, -5 * kDegree, 0};
  const double e0 = DoublePoleEnergy(p, s);
  const double scale = p.pole_mass[0] * p.gravity * p.half_length[0];
  double worst = 0;
  for (int n = 0; n < 20000; ++n) {
    s = DoublePoleRk4Step(p, s, 0.0, p.dt);
    worst = std::max(worst, std::fabs(DoublePoleEnergy(p, s) - e0));
  }
  EXPECT_GT(std::fabs(s[2]), 36 * kDegree);  // it really swung
  EXPECT_LT(worst, 5e-5 * scale) << "worst drift " << worst / scale;
}

TEST(DoublePoleTest, FrictionDissipatesEnergy) {
  DoublePoleParams p;
  p.pole_friction = 1e-3;
  DoublePoleState s = {0, 0.5, 170 * kDegree, 1.0, 175 * kDegree, 0};
  const double e0 = DoublePoleEnergy(p, s);
  for (int n = 0; n < 2000; ++n) s = DoublePoleRk4Step(p, s, 0.0, p.dt);
  EXPECT_LT(DoublePoleEnergy(p, s), e0);
}

TEST(DoublePoleTest, RungeKuttaIsFourthOrder) {
  // Halving dt cuts the error at t = 0.2 s by about 2^4 = 16 (common practice:
  // the order of classical RK4). The cart starts moving so that the friction
  // term's sgn(x') has no kink on the way (from rest it spoils the order).
  const DoublePoleParams p;
  auto run = [&](double dt, int steps) {
    DoublePoleState s = {0, 0.5, 5 * kDegree, 0, -3 * kDegree, 0};
    for (int n = 0; n < steps; ++n) s = DoublePoleRk4Step(p, s, 2.0, dt);
    return s;
  };
  const DoublePoleState fine = run(0.01 / 64, 20 * 64);
  const DoublePoleState coarse = run(0.01, 20);
  const DoublePoleState half = run(0.005, 40);
  double coarse_error = 0;
  double half_error = 0;
  for (int i = 0; i < 6; ++i) {
    coarse_error += std::fabs(coarse[i] - fine[i]);
    half_error += std::fabs(half[i] - fine[i]);
  }
  const double ratio = coarse_error / half_error;  // measured 15.4
  EXPECT_GT(ratio, 12.0);
  EXPECT_LT(ratio, 20.0);
}

TEST(DoublePoleTest, OneActionIsTwoStepsWithTheClampedForce) {
  const DoublePoleParams p;
  const DoublePoleState s0 = DoublePoleStart(false);
  DoublePoleState manual = DoublePoleRk4Step(p, s0, 10.0, 0.01);
  manual = DoublePoleRk4Step(p, manual, 10.0, 0.01);
  EXPECT_EQ(DoublePoleAct(p, s0, 1.0), manual);
  EXPECT_EQ(DoublePoleAct(p, s0, 3.0), manual);  // u clamped to 1
}

TEST(DoublePoleTest, FailsPastThirtySixDegreesOnEitherPole) {
  const DoublePoleParams p;
  EXPECT_FALSE(
      DoublePoleFailed(p, {2.39, 0, 35 * kDegree, 0, -35 * kDegree, 0}));
  EXPECT_TRUE(DoublePoleFailed(p, {0, 0, 0, 0, -37 * kDegree, 0}));
  EXPECT_TRUE(DoublePoleFailed(p, {0, 0, 37 * kDegree, 0, 0, 0}));
  EXPECT_TRUE(DoublePoleFailed(p, {2.5, 0, 0, 0, 0, 0}));
}

// ---- Generalisation starts ----

TEST(GeneralisationTest, SixHundredTwentyFiveDistinctStartsOnTheGrid) {
  // Gruau, Whitley & Pyeatt 1996 (from memory): 5 fractions of 4 ranges.
  const std::vector<DoublePoleState> starts = GeneralisationStarts();
  ASSERT_EQ(starts.size(), 625u);
  std::set<DoublePoleState> distinct(starts.begin(), starts.end());
  EXPECT_EQ(distinct.size(), 625u);
  // Index 0: the 0.05 point of each range, -h + 0.05 * 2h = -0.9 h.
  EXPECT_NEAR(starts[0][0], -0.9 * 2.16, 1e-12);
  EXPECT_NEAR(starts[0][1], -0.9 * 1.35, 1e-12);
  EXPECT_NEAR(starts[0][2], -0.9 * 3.6 * kDegree, 1e-12);
  EXPECT_NEAR(starts[0][3], -0.9 * 8.6 * kDegree, 1e-12);
  // Index 312 = 125*2 + 25*2 + 5*2 + 2: the middle of every range.
  for (int k = 0; k < 6; ++k) EXPECT_NEAR(starts[312][k], 0.0, 1e-12);
  // Index 624: the 0.95 point, +0.9 h; the short pole always upright at rest.
  EXPECT_NEAR(starts[624][0], 0.9 * 2.16, 1e-12);
  EXPECT_NEAR(starts[624][3], 0.9 * 8.6 * kDegree, 1e-12);
  for (const DoublePoleState& s : starts) {
    EXPECT_EQ(s[4], 0.0);
    EXPECT_EQ(s[5], 0.0);
  }
}

// ---- Episodes ----

class ConstantController : public Controller {
 public:
  explicit ConstantController(double u) : u_(u) {}
  void Reset() override { ++resets; }
  absl::StatusOr<double> Act(absl::Span<const double>) override { return u_; }
  int resets = 0;

 private:
  double u_;
};

TEST(EpisodeTest, DoingNothingLetsThePolesFallWithinSeconds) {
  ConstantController idle(0.0);
  DoublePoleTask task;
  absl::StatusOr<uint64_t> steps =
      BalanceDoublePole(task, DoublePoleStart(false), 100000, idle);
  ASSERT_TRUE(steps.ok());
  EXPECT_GT(*steps, 10u);
  EXPECT_LT(*steps, 500u);  // 10 s
  EXPECT_EQ(idle.resets, 1);
}

TEST(EpisodeTest, DampingFitnessOfAnEarlyFailureIsTheTimeTermOnly) {
  // t < 100 gives f2 = 0, so F = 0.1 t / 1000 (Gruau et al. 1996, from memory).
  ConstantController push(1.0);
  DoublePoleTask task;
  task.hide_velocities = true;
  absl::StatusOr<uint64_t> steps =
      BalanceDoublePole(task, DoublePoleStart(true), 1000, push);
  ASSERT_TRUE(steps.ok());
  ASSERT_LT(*steps, 100u);
  absl::StatusOr<double> fitness =
      DampingFitness(task, DoublePoleStart(true), push);
  ASSERT_TRUE(fitness.ok());
  EXPECT_DOUBLE_EQ(*fitness, 0.1 * static_cast<double>(*steps) / 1000.0);
}

TEST(EpisodeTest, BangBangCartPoleFailsFastUnderAConstantPush) {
  ConstantController push(1.0);
  CartPoleTask task;
  absl::StatusOr<uint64_t> steps =
      BalanceCartPole(task, CartPoleState{}, 100000, push);
  ASSERT_TRUE(steps.ok());
  EXPECT_LT(*steps, 100u);
}

}  // namespace
}  // namespace skerry::pole
