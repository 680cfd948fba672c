// SPDX-License-Identifier: MIT
// Commented method templates written by `veq method new KIND`.
#include <string>
#include <vector>

#include "veq/core/error.hpp"
#include "veq/method/method.hpp"

namespace veq::method {
namespace {

constexpr const char* kHeader = R"(# veq method file (TOML). Lines starting with '#' are comments.
# Every key is described in the README section "Method files".
# Amounts: volumes in mL, masses in g, concentrations in mol/L.
# "<x>_uncertainty_..." is a standard uncertainty; "<x>_tolerance_..." a ± tolerance
# (taken as a rectangular distribution, u = tolerance / sqrt(3)).
# Caution: titrations use corrosive acids and bases. Follow your lab's procedures;
# veq computes the result, it does not certify it.
)";

constexpr const char* kAssay = R"(
name = "Acid assay"
kind = "assay"

[analyte]
name = "HCl"
molar_mass_g_mol = 36.46      # needed for g/L, mg/L and % (w/w)
stoichiometry = 1             # mol analyte per mol titrant

[sample]
volume_mL = 20.00             # leave out to take the run's "Sample volume" metadata
volume_tolerance_mL = 0.03    # 20 mL Class A pipette

[titrant]
name = "NaOH"
concentration_mol_L = 0.1000  # or: titer_file = "naoh-titer.toml" (written by a standardisation)
concentration_uncertainty_mol_L = 0.0002
titer = 1.000

[blank]
volume_mL = 0.00
volume_uncertainty_mL = 0.00

[burette]
tolerance_mL = 0.05           # Class A 50 mL burette (ISO 385 / ASTM E287)

[[result]]
name = "HCl content"
unit = "g/L"                  # mol/L, g/L, mg/L, % (w/w), mg/L as CaCO3, mg KOH/g, mol/L titrant
endpoint = "last"             # 1, 2, ..., "first", "last"; or at_pH = 8.3 for a fixed-pH endpoint
volume_from = "consensus"     # consensus, derivative, gran, fit
# spec_low = 3.2
# spec_high = 3.6

[acceptance]
max_rsd_percent = 0.5
endpoints_required = 1
)";

constexpr const char* kAlkalinity = R"(
name = "Total alkalinity"
kind = "alkalinity"
# Standard Methods 2320 B: titrate with strong acid to pH 4.5 (total, T) and 8.3
# (phenolphthalein, P). Alkalinity, mg CaCO3/L = A x N x 50 000 / mL sample.

[sample]
volume_mL = 100.0
volume_tolerance_mL = 0.08    # 100 mL Class A pipette

[titrant]
name = "HCl"
concentration_mol_L = 0.0200
concentration_uncertainty_mol_L = 0.00004
equivalents_per_mol = 1       # 2 for H2SO4 (normality = 2 x molarity)

[burette]
tolerance_mL = 0.05

[[result]]
name = "P alkalinity"
unit = "mg/L as CaCO3"
at_pH = 8.3

[[result]]
name = "Total alkalinity"
unit = "mg/L as CaCO3"
at_pH = 4.5
# spec_low = 20
# spec_high = 200

[acceptance]
max_rsd_percent = 2.0
)";

constexpr const char* kAcidNumber = R"(
name = "Acid number"
kind = "acid-number"
# ASTM D664 style: acid number, mg KOH/g = (A - B) x M x 56.1 / W.

[sample]
mass_g = 5.00                 # leave out to take the run's "Sample mass" metadata
mass_uncertainty_g = 0.0002

[titrant]
name = "KOH in propan-2-ol"
concentration_mol_L = 0.1000
concentration_uncertainty_mol_L = 0.0003

[blank]
volume_mL = 0.10              # B: the titration of the solvent alone
volume_uncertainty_mL = 0.01

[burette]
tolerance_mL = 0.02           # 10 mL Class A burette

[[result]]
name = "Acid number"
unit = "mg KOH/g"
endpoint = "last"
# spec_high = 0.5

[acceptance]
endpoints_required = 1
)";

constexpr const char* kStandardisation = R"(
name = "NaOH standardisation against KHP"
kind = "standardisation"
# Titrant concentration c = m x P / (M x nu x (V - Vb) / 1000).
# Write the result for later methods with: veq analyze RUN --method THIS --titer-out naoh-titer.toml

[standard]
name = "potassium hydrogen phthalate"
# mass_g = 0.5105             # leave out to take the run's "Sample mass" metadata
mass_uncertainty_g = 0.0001
purity = 0.9995               # mass fraction (or a percentage)
purity_uncertainty = 0.0002
molar_mass_g_mol = 204.22
molar_mass_uncertainty_g_mol = 0.005

[analyte]
stoichiometry = 1             # mol standard per mol titrant

[titrant]
name = "NaOH"

[burette]
tolerance_mL = 0.05

[[result]]
name = "NaOH concentration"
unit = "mol/L titrant"
endpoint = "last"

[acceptance]
max_rsd_percent = 0.2         # titre repeatability (Ph. Eur.)
endpoints_required = 1
)";

}  // namespace

std::vector<std::string> method_kinds() { return {"assay", "alkalinity", "acid-number", "standardisation"}; }

std::string method_template(std::string_view kind) {
  if (kind == "assay") return std::string(kHeader) + kAssay;
  if (kind == "alkalinity") return std::string(kHeader) + kAlkalinity;
  if (kind == "acid-number") return std::string(kHeader) + kAcidNumber;
  if (kind == "standardisation" || kind == "standardization") return std::string(kHeader) + kStandardisation;
  std::string kinds;
  for (const auto& k : method_kinds()) kinds += (kinds.empty() ? "" : ", ") + k;
  throw InputError({"veq method new", 0, 0}, "unknown method kind '" + std::string(kind) + "'", "one of: " + kinds);
}

}  // namespace veq::method
