// SPDX-License-Identifier: MIT
// Physical constants, each with its source, and the Nernst slope built from them.
#pragma once

namespace veq::constants {

// Molar gas constant R [J mol^-1 K^-1]; exact since the 2019 SI redefinition (CODATA 2018).
inline constexpr double kGasConstant = 8.314462618;
// Faraday constant F [C mol^-1]; exact since the 2019 SI redefinition (CODATA 2018).
inline constexpr double kFaraday = 96485.33212;
// 0 °C in kelvin [K] (definition of the Celsius scale).
inline constexpr double kZeroCelsius = 273.15;
// ln(10), to double precision.
inline constexpr double kLn10 = 2.302585092994045684;
// Reference temperature of handbook constants [°C].
inline constexpr double kStandardTemperatureC = 25.0;

}  // namespace veq::constants

namespace veq {

// Nernst slope s = R*T*ln(10)/F of an ideal glass electrode [mV per pH unit]
// at temperature_C [°C]; 59.159 mV at 25 °C. Formula: Nernst equation with
// CODATA 2018 R and F.
[[nodiscard]] constexpr double nernst_slope_mV(double temperature_C) {
  return 1000.0 * constants::kGasConstant * (temperature_C + constants::kZeroCelsius) *
         constants::kLn10 / constants::kFaraday;
}

}  // namespace veq
