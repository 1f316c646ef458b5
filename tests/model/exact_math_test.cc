// base/exact_math.h against the C library's sin, cos and exp (glibc, a
// general-purpose reference): plain arithmetic must agree to a few units in the
// last place over the ranges the tables use, and the values the tables rest on
// must be what the textbooks give (sin(pi/6) = 1/2, cos(pi/3) = 1/2, e).
#include <catch2/catch.hpp>

#include <cmath>

#include "tamis/base/exact_math.h"

using namespace tamis;

TEST_CASE("plain-arithmetic sin, cos and exp agree with the C library", "[math]") {
  constexpr double kPi = 3.14159265358979323846;
  double worst_sin = 0, worst_cos = 0, worst_exp = 0;
  for (int i = -2000; i <= 2000; ++i) {
    const double x = i / 257.0;  // -7.8 .. 7.8 half-turns, not on the grid of the tables
    worst_sin = std::max(worst_sin, std::abs(sin_pi(x) - std::sin(kPi * x)));
    worst_cos = std::max(worst_cos, std::abs(cos_pi(x) - std::cos(kPi * x)));
  }
  for (int i = -4000; i <= 200; ++i) {
    const double x = i / 100.0;  // -40 .. 2: the blur table's exponents lie in -31 .. 0
    worst_exp = std::max(worst_exp, std::abs(exp_plain(x) - std::exp(x)) / std::exp(x));
  }
  INFO("largest differences: sin " << worst_sin << ", cos " << worst_cos << ", exp (relative) " << worst_exp);
  CHECK(worst_sin < 1e-14);
  CHECK(worst_cos < 1e-14);
  CHECK(worst_exp < 1e-13);
  CHECK(sin_pi(1.0 / 6.0) == Approx(0.5).epsilon(1e-15));
  CHECK(cos_pi(1.0 / 3.0) == Approx(0.5).epsilon(1e-15));
  CHECK(sin_pi(1.0) == 0.0);  // exactly: 1 reduces to 0
  CHECK(exp_plain(1.0) == Approx(2.718281828459045).epsilon(1e-15));
  CHECK(exp_plain(0.0) == 1.0);
}
