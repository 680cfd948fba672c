// SPDX-License-Identifier: MIT
// Properties of liquid water at 0.1 MPa: density and the ion product Kw, each from a named published formula.
#pragma once

#include <cmath>
#include <string_view>

#include "veq/core/constants.hpp"

namespace veq::chem {

// Density of air-free liquid water at 0.1 MPa [g/cm^3], 0–150 °C:
// Kell, J. Chem. Eng. Data 20 (1975) 97, eq. 16 (IPTS-68 temperatures; the
// difference from ITS-90 is below 1e-6 g/cm^3 here). 0.997047 at 25 °C.
template <typename T>
[[nodiscard]] T water_density_g_cm3(const T& temperature_C) {
  const T& t = temperature_C;
  const T num = 999.83952 +
                t * (16.945176 + t * (-7.9870401e-3 + t * (-46.170461e-6 + t * (105.56302e-9 + t * (-280.54253e-12)))));
  return num / (1.0 + 16.879850e-3 * t) / 1000.0;
}

// Ion product of water, molal, as pKw = -log10(Kw), at temperature_C [°C] and
// water density density_g_cm3 [g/cm^3]. IAPWS R11-07, "Release on the
// Ionization Constant of H2O" (2007), after Bandura & Lvov, J. Phys. Chem. Ref.
// Data 35 (2006) 15; valid 0–800 °C, 0–1000 MPa. 13.995 at 25 °C, 0.1 MPa.
template <typename T>
[[nodiscard]] T pKw_iapws_r11_07(const T& temperature_C, const T& density_g_cm3) {
  using std::exp;
  using std::log;
  constexpr double n = 6.0;
  constexpr double a0 = -0.864671, a1 = 8659.19, a2 = -22786.2;
  constexpr double b0 = 0.642044, b1 = -56.8534, b2 = -0.375754;
  constexpr double g0 = 0.61415, g1 = 48251.33, g2 = -67707.93, g3 = 10102100.0;
  constexpr double molar_mass_water_g_mol = 18.015268;
  const T temp_K = temperature_C + constants::kZeroCelsius;
  const T inv_T = 1.0 / temp_K;
  const T& rho = density_g_cm3;
  const T rho_2_3 = exp(log(rho) * (2.0 / 3.0));
  const T Q = rho * exp(a0 + a1 * inv_T + a2 * inv_T * inv_T * rho_2_3);
  const T pKw_gas = g0 + inv_T * (g1 + inv_T * (g2 + inv_T * g3));
  const T log10_1pQ = log(1.0 + Q) / constants::kLn10;
  return -2.0 * n * (log10_1pQ - Q / (Q + 1.0) * rho * (b0 + b1 * inv_T + b2 * rho)) + pKw_gas +
         2.0 * std::log10(molar_mass_water_g_mol / 1000.0);
}

// The lighter alternative: Harned & Robinson, Trans. Faraday Soc. 36 (1940)
// 973 (citation from memory), pKw = 4470.99/T - 6.0875 + 0.01706 T (T in K), 0–60 °C.
template <typename T>
[[nodiscard]] T pKw_harned_robinson(const T& temperature_C) {
  const T temp_K = temperature_C + constants::kZeroCelsius;
  return 4470.99 / temp_K - 6.0875 + 0.01706 * temp_K;
}

// Which published formula gives Kw(T).
enum class KwFormula {
  iapws_r11_07,         // IAPWS R11-07 (Bandura & Lvov 2006) with Kell (1975) density: the default
  harned_robinson_1940  // Harned & Robinson (1940), 0–60 °C
};

[[nodiscard]] std::string_view to_string(KwFormula f);  // "iapws-r11-07", "harned-robinson-1940"

// pKw at temperature_C by the chosen formula (0.1 MPa).
template <typename T>
[[nodiscard]] T pKw(const T& temperature_C, KwFormula formula = KwFormula::iapws_r11_07) {
  if (formula == KwFormula::harned_robinson_1940) return pKw_harned_robinson(temperature_C);
  return pKw_iapws_r11_07(temperature_C, water_density_g_cm3(temperature_C));
}

}  // namespace veq::chem
