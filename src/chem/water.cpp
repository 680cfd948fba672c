// SPDX-License-Identifier: MIT
// Water properties: the formulas are templates in the header; names of the choices here.
#include "veq/chem/water.hpp"

namespace veq::chem {

std::string_view to_string(KwFormula f) {
  return f == KwFormula::harned_robinson_1940 ? "harned-robinson-1940" : "iapws-r11-07";
}

}  // namespace veq::chem
