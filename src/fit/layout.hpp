// SPDX-License-Identifier: MIT
// How a fit model's parameters map to the chemistry: the shape of a model, its parameter list and the templated model.
#pragma once

#include <string>
#include <vector>

#include "veq/chem/model.hpp"
#include "veq/chem/scalar.hpp"
#include "veq/core/run.hpp"
#include "veq/fit/fit.hpp"

namespace veq::fit::detail {

// The structure of a candidate: an optional strong component (acid for a base
// titrant, base for an acid titrant) and at most one weak system.
struct ModelShape {
  std::string name;  // reported model name
  ModelKind kind = ModelKind::weak_acid;
  bool strong = false;  // has a strong acid (or base) component
  int weak_steps = 0;   // 0: no weak system
  int top_charge = 0;   // of the weak system's fully protonated form
  int added_form = 0;   // protons the added form has lost
  // A second salt of the same weak acid, added as this form (1: NaHCO3 beside Na2CO3); -1: none. It shares
  // the pKa values; its concentration is the parameter c_bicarbonate.
  int second_added_form = -1;
  std::vector<double> table_pKa;  // analyte models: the table's values (initial guesses) at the run's temperature
};

// The shape of a kind (analyte models are built from the table in fit.cpp).
[[nodiscard]] ModelShape shape_of(ModelKind kind);

// What a parameter stands for.
enum class Role { c_strong, c, c_second, pKa, offset, e0, slope, titer, carbonate };

struct ParamDef {
  std::string name;
  std::string unit;
  Role role = Role::c;
  int step = 0;        // pKa: 0-based step
  double lower = 0.0;  // bounds [unit]
  double upper = 0.0;
  double initial = 0.0;  // start (free) or held value (fixed) [unit]
  double scale = 1.0;    // the solver works on value / scale [unit]
  int index = -1;        // position in the free vector; -1 when held
};

// A candidate ready to fit: the base chemistry (V0, Ct, pKw, A, carbonate
// pKa at the run's temperature) and the parameters that overwrite it.
struct Layout {
  ModelShape shape;
  chem::Model<double> base;
  std::vector<ParamDef> params;
  SignalKind signal = SignalKind::ph;
  double nominal_titrant_mol_L = 0.1;
  int free_count = 0;

  // The parameter's value from the solver's scaled free vector u.
  template <typename T>
  [[nodiscard]] T value(const ParamDef& p, const T* u) const {
    if (p.index < 0) return T(p.initial);
    return u[p.index] * p.scale;
  }

  // The chemistry at the scaled free vector u.
  template <typename T>
  [[nodiscard]] chem::Model<T> model(const T* u) const {
    chem::Model<T> m = chem::model_cast<T>(base);
    T titer = T(1.0);
    T carbonate = T(0.0);
    bool has_carbonate = false;
    for (const ParamDef& p : params) {
      const T v = value(p, u);
      switch (p.role) {
        case Role::c_strong:
          if (base.titrant_sign > 0)
            m.strong_acid_mol_L = v;
          else
            m.strong_base_mol_L = v;
          break;
        case Role::c:
          if (shape.weak_steps > 0) {
            m.protolytes[0].conc_mol_L = v;
          } else if (base.titrant_sign > 0) {
            m.strong_acid_mol_L = v;
          } else {
            m.strong_base_mol_L = v;
          }
          break;
        case Role::c_second:
          m.protolytes[1].conc_mol_L = v;
          break;
        case Role::pKa:
          // Every weak system of a model is the same acid (one, or two salts of it).
          for (auto& q : m.protolytes) q.pKa[static_cast<std::size_t>(p.step)] = v;
          break;
        case Role::titer:
          titer = v;
          break;
        case Role::carbonate:
          carbonate = v;
          has_carbonate = true;
          break;
        case Role::offset:
        case Role::e0:
        case Role::slope:
          break;
      }
    }
    m.titrant_conc_mol_L = titer * nominal_titrant_mol_L;
    if (has_carbonate) m.titrant_carbonate.conc_mol_L = 0.5 * carbonate * m.titrant_conc_mol_L;
    return m;
  }

  // The reading the model predicts from its pH: pH + offset (pH runs) or
  // E0 - slope x pH (mV runs).
  template <typename T>
  [[nodiscard]] T reading(const T& pH, const T* u) const {
    T offset = T(0.0), e0 = T(0.0), slope = T(0.0);
    for (const ParamDef& p : params) {
      if (p.role == Role::offset) offset = value(p, u);
      if (p.role == Role::e0) e0 = value(p, u);
      if (p.role == Role::slope) slope = value(p, u);
    }
    if (signal == SignalKind::ph) return pH + offset;
    return e0 - slope * pH;
  }

  [[nodiscard]] const ParamDef* find(Role role, int step = 0) const {
    for (const ParamDef& p : params) {
      if (p.role == role && (role != Role::pKa || p.step == step)) return &p;
    }
    return nullptr;
  }
};

}  // namespace veq::fit::detail
