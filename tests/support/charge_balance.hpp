// SPDX-License-Identifier: MIT
// Exact ideal-solution titration curves computed inside the tests, independent of veq's own code.
//
// Charge balance for a sample of volume V0 holding a strong acid (Ca), a strong
// base (Cb0) and weak acids (each total C with pKa values), titrated with a
// strong base of concentration Ct (or a strong acid, Ct < 0):
//   h - Kw/h + (Cb0 V0 + Ct V)/(V0+V) = Ca V0/(V0+V) + sum_k C_k V0/(V0+V) nbar_k(h)
// where nbar_k is the mean negative charge of weak acid k. Solving for V gives
// the closed form V = V0 (A - Delta) / (Ct + Delta), with Delta = h - Kw/h and
// A = Ca - Cb0 + sum C_k nbar_k; pH(V) comes from bisection on it (pH is
// monotonic in V). Textbook charge balance (e.g. Harris, Quantitative Chemical
// Analysis, acid-base titration chapter; from memory).
#pragma once

#include <cmath>
#include <vector>

namespace veq::test {

struct WeakAcid {
  double conc_mol_L;
  std::vector<double> pKa;
};

struct Sample {
  double V0_mL = 25.0;
  double strong_acid = 0.0;  // mol/L
  double strong_base = 0.0;  // mol/L
  std::vector<WeakAcid> weak;
  double titrant = 0.1;      // mol/L; positive = strong base, negative = strong acid
  double pKw = 13.995;       // 25 °C: CRC Handbook, "Ionization constant of water" (Bandura & Lvov 2006)
};

// Mean negative charge of a weak acid H_nA at [H+] = h.
inline double nbar(const WeakAcid& a, double h) {
  // alpha_j proportional to prod_{i<j} Ka_i / h^j
  double term = 1.0, sum = 1.0, weighted = 0.0;
  for (std::size_t j = 0; j < a.pKa.size(); ++j) {
    term *= std::pow(10.0, -a.pKa[j]) / h;
    sum += term;
    weighted += static_cast<double>(j + 1) * term;
  }
  return weighted / sum;
}

// Titrant volume [mL] at which the solution has pH ph (closed form).
inline double volume_at_pH(const Sample& s, double ph) {
  const double h = std::pow(10.0, -ph);
  const double kw = std::pow(10.0, -s.pKw);
  const double delta = h - kw / h;
  double A = s.strong_acid - s.strong_base;
  for (const auto& a : s.weak) A += a.conc_mol_L * nbar(a, h);
  return s.V0_mL * (A - delta) / (s.titrant + delta);
}

// pH after adding V mL of titrant, by bisection on volume_at_pH.
inline double pH_at_volume(const Sample& s, double V) {
  double lo = -1.0, hi = 15.0;  // volume_at_pH rises with pH for a base titrant
  const bool rising = s.titrant > 0;
  for (int i = 0; i < 200; ++i) {
    const double mid = 0.5 * (lo + hi);
    const double vm = volume_at_pH(s, mid);
    const bool below = std::isfinite(vm) && vm >= 0 ? (vm < V) : (mid < 7.0) == rising;
    if (below == rising) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

}  // namespace veq::test
