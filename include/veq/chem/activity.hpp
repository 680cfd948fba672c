// SPDX-License-Identifier: MIT
// Activity coefficients of ions: the Davies equation and the Debye–Hückel constant A(T).
#pragma once

#include <array>
#include <cmath>
#include <string_view>

#include "veq/chem/scalar.hpp"
#include "veq/chem/water.hpp"
#include "veq/core/constants.hpp"

namespace veq::chem {

// How activity coefficients are computed.
enum class ActivityModel {
  ideal,  // all activity coefficients 1 (infinite dilution)
  davies  // Davies equation, ionic strength from the composition at each point: the default
};

[[nodiscard]] std::string_view to_string(ActivityModel m);  // "ideal", "davies"

// Relative permittivity of water at 0.1 MPa, 0–100 °C: Malmberg & Maryott,
// J. Res. NBS 56 (1956) 1 (from memory): 87.740 - 0.40008 t + 9.398e-4 t^2 - 1.410e-6 t^3.
template <typename T>
[[nodiscard]] T water_permittivity(const T& temperature_C) {
  const T& t = temperature_C;
  return 87.740 + t * (-0.40008 + t * (9.398e-4 + t * (-1.410e-6)));
}

// Debye–Hückel A from the permittivity and density of water [(mol/kg)^-1/2]:
// A = 1.82483e6 sqrt(rho) / (eps_r T)^1.5 (Robinson & Stokes, Electrolyte
// Solutions, from memory), with Kell (1975) density and Malmberg & Maryott
// (1956) permittivity. 0.5108 at 25 °C, 0.002–0.004 above the tabulated A.
template <typename T>
[[nodiscard]] T debye_huckel_A_from_permittivity(const T& temperature_C) {
  using std::sqrt;
  const T epsT = water_permittivity(temperature_C) * (temperature_C + constants::kZeroCelsius);
  return 1.82483e6 * sqrt(water_density_g_cm3(temperature_C)) / (epsT * sqrt(epsT));
}

namespace detail {
// Debye–Hückel A [(mol/L)^-1/2] at 0, 5, ..., 40, 50, 60 °C as printed with
// Kielland's table (Manov, Bates, Hamer & Acree, J. Am. Chem. Soc. 65 (1943)
// 1765; citation from memory); 0.5085 at 25 °C.
// clang-format off
inline constexpr std::array<double, 11> kDebyeHuckelTableC = {0, 5, 10, 15, 20, 25, 30, 35, 40, 50, 60};
inline constexpr std::array<double, 11> kDebyeHuckelTableA = {0.4883, 0.4921, 0.4960, 0.5000, 0.5042, 0.5085,
                                                              0.5130, 0.5175, 0.5221, 0.5319, 0.5425};
// clang-format on
}  // namespace detail

// Debye–Hückel A for the Davies equation at temperature_C [°C], 0–100 °C
// [(mol/L)^-1/2]: linear interpolation in the table above (its curvature
// makes that exact to 3e-5); above 60 °C the table's last value carried by the
// temperature dependence of the permittivity formula, A(60)·Af(t)/Af(60).
// Below 0 °C the first segment is extended.
template <typename T>
[[nodiscard]] T debye_huckel_A(const T& temperature_C) {
  const auto& tc = detail::kDebyeHuckelTableC;
  const auto& ta = detail::kDebyeHuckelTableA;
  const double t = value_of(temperature_C);
  if (t > tc.back()) {
    return ta.back() * debye_huckel_A_from_permittivity(temperature_C) / debye_huckel_A_from_permittivity(tc.back());
  }
  std::size_t i = 0;
  while (i + 2 < tc.size() && t > tc[i + 1]) ++i;
  const double slope = (ta[i + 1] - ta[i]) / (tc[i + 1] - tc[i]);
  return ta[i] + slope * (temperature_C - tc[i]);
}

// The Davies function g(I) = sqrt(I)/(1 + sqrt(I)) - b I, so that
// log10 gamma_z = -A z^2 g(I). Davies, Ion Association (Butterworths, 1962)
// p. 41, with b = 0.3 (b = 0.2 in Davies, J. Chem. Soc. 1938, 2093).
template <typename T>
[[nodiscard]] T davies_g(const T& ionic_strength, double b = 0.3) {
  using std::sqrt;
  const T s = sqrt(ionic_strength);
  return s / (1.0 + s) - b * ionic_strength;
}

// dg/dI (I > 0).
[[nodiscard]] inline double davies_g_derivative(double ionic_strength, double b = 0.3) {
  const double s = std::sqrt(ionic_strength);
  return 1.0 / (2.0 * s * (1.0 + s) * (1.0 + s)) - b;
}

// log10 of the activity coefficient of an ion of charge z at ionic strength
// ionic_strength [mol/L], Davies equation with Debye–Hückel constant A.
// Meant for I up to about 0.1–0.5 mol/L.
template <typename T>
[[nodiscard]] T davies_log10_gamma(int z, const T& ionic_strength, const T& A, double b = 0.3) {
  return -A * static_cast<double>(z * z) * davies_g(ionic_strength, b);
}

}  // namespace veq::chem
