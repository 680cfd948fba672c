// SPDX-License-Identifier: MIT
// Activity coefficients: the formulas are templates in the header; names of the choices here.
#include "veq/chem/activity.hpp"

namespace veq::chem {

std::string_view to_string(ActivityModel m) {
  return m == ActivityModel::ideal ? "ideal" : "davies";
}

}  // namespace veq::chem
