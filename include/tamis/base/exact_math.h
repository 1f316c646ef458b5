// Transcendental functions in plain arithmetic, for values that decisions rest
// on: the same bits on every processor. The C library's sin, cos and exp may
// pick another code path on processors with fused multiply-add (glibc chooses
// at load time), and their last bit may then differ; these use only +, -, x,
// / and floor, which IEEE 754 rounds one way. Accurate to a few units in the
// last place; slower than the library's, so for tables made once. Pure.
#pragma once

#include <cmath>

namespace tamis {

// sin(pi x): x reduced to [-1/2, 1/2] about the nearest integer, then the Taylor
// series to the term in z^23 (|z| <= pi / 2: the rest is below 1e-17).
inline double sin_pi(double x) {
  const double k = std::floor(x + 0.5);
  const double z = 3.14159265358979323846 * (x - k);
  const double z2 = z * z;
  double term = z, sum = z;
  for (int n = 1; n <= 11; ++n) {
    term *= -z2 / double((2 * n) * (2 * n + 1));
    sum += term;
  }
  return std::fmod(k, 2.0) != 0.0 ? -sum : sum;
}

// cos(pi x).
inline double cos_pi(double x) { return sin_pi(x + 0.5); }

// exp(x) for |x| up to a few hundred: x halved until |x| <= 1/2 (exact), the
// Taylor series to the term in x^24, then squared as many times.
inline double exp_plain(double x) {
  int halvings = 0;
  while (x > 0.5 || x < -0.5) {
    x /= 2.0;
    ++halvings;
  }
  double term = 1.0, sum = 1.0;
  for (int n = 1; n <= 24; ++n) {
    term *= x / n;
    sum += term;
  }
  for (int i = 0; i < halvings; ++i) sum *= sum;
  return sum;
}

}  // namespace tamis
