// SPDX-License-Identifier: MIT
// Method files: what a lab reports from a titration, read from human-edited TOML.
#pragma once

#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace veq::method {

// The reportable units veq computes (a fixed set used by the trade).
enum class ResultUnit {
  mol_L,          // "mol/L"          (V - Vb) Ct t nu / Vs
  g_L,            // "g/L"            ... x M
  mg_L,           // "mg/L"           ... x M x 1000
  percent_w_w,    // "% (w/w)"        (V - Vb) Ct t nu M / (10 m)
  mg_L_CaCO3,     // "mg/L as CaCO3"  A N 50 000 / Vs (SM 2320 B)
  mg_KOH_per_g,   // "mg KOH/g"       (A - B) M 56.1 / W (ASTM D664)
  titrant_mol_L,  // "mol/L titrant"  standardisation: m P / (M nu (V - Vb))
};
[[nodiscard]] std::string_view to_string(ResultUnit u);
[[nodiscard]] std::optional<ResultUnit> unit_from_string(std::string_view text);

// Which volume of an endpoint a result uses.
enum class VolumeSource { consensus, derivative, gran, fit };
[[nodiscard]] std::string_view to_string(VolumeSource s);

// Which endpoint a result is computed from: one found by veq (by index, or
// the last), or the volume where the curve reaches a fixed pH (alkalinity).
struct EndpointChoice {
  int index = 0;                 // 1-based; 0 with last = true: the last endpoint
  bool last = true;
  std::optional<double> at_pH;   // fixed-pH endpoint [pH]
  VolumeSource source = VolumeSource::consensus;
  double pH_uncertainty = 0.02;  // standard uncertainty of a pH reading, for fixed-pH endpoints [pH]
};

struct ResultSpec {
  std::string name;
  EndpointChoice endpoint;
  ResultUnit unit = ResultUnit::mol_L;
  int decimals = -1;             // -1: from the uncertainty (2 significant digits)
  std::optional<double> spec_low;
  std::optional<double> spec_high;
  std::size_t line = 0;          // where it is defined in the method file
};

// A method as read from its file. Amounts in canonical units; standard
// uncertainties (a tolerance given as "tolerance" is converted as a
// rectangular distribution, u = tol / sqrt(3), GUM 4.3.7).
struct Method {
  std::string path;              // file it came from
  std::string identity;          // hash of its bytes, for resumable batches
  std::string name;
  std::string kind;              // free text: assay, alkalinity, acid-number, standardisation, ...

  std::string analyte;
  std::optional<double> molar_mass_g_mol;     // M of the analyte [g/mol]
  double molar_mass_u_g_mol = 0.0;
  double stoichiometry = 1.0;                 // nu: mol analyte per mol titrant [-]
  std::optional<int> analyte_charge;          // charge of the form titrated from (0 for HA or B), for activity

  std::optional<double> sample_volume_mL;     // Vs [mL], else from the run
  double sample_volume_u_mL = 0.0;
  std::optional<double> sample_mass_g;        // m [g], else from the run
  double sample_mass_u_g = 0.0;

  std::string titrant_name;
  std::optional<double> titrant_conc_mol_L;   // Ct [mol/L], else from the run
  double titrant_conc_u_mol_L = 0.0;
  double titer = 1.0;                         // t: titrant factor [-]
  double titer_u = 0.0;
  double titrant_equivalents = 1.0;           // eq per mol (2 for H2SO4) for normality [-]
  std::string titer_file;                     // where Ct and its uncertainty came from, when a titer file

  double blank_mL = 0.0;                      // Vb [mL]
  double blank_u_mL = 0.0;
  double burette_tolerance_mL = 0.05;         // Class A 50 mL, ISO 385 / ASTM E287 [mL]

  // Standardisation against a primary standard (result unit titrant_mol_L).
  bool standardisation = false;
  std::string standard_name;
  std::optional<double> standard_mass_g;      // else the run's sample mass
  double standard_mass_u_g = 0.0;
  double standard_purity = 1.0;               // mass fraction [-]
  double standard_purity_u = 0.0;
  std::optional<double> standard_molar_mass_g_mol;
  double standard_molar_mass_u_g_mol = 0.0;

  std::vector<ResultSpec> results;

  std::optional<double> max_rsd_percent;      // replicate acceptance [%]
  std::optional<int> endpoints_required;      // run acceptance [-]
  std::string group_by = "sample_id";         // replicates: "sample_id" or "pattern"
  std::string group_pattern;                  // ECMAScript regex on the file stem; group = capture 1
};

// Reads a method file. Throws veq::InputError naming the file, the line and
// the key for a missing key, an unknown key, a wrong unit or an impossible
// value (negative mass, ...), and for TOML syntax errors.
[[nodiscard]] Method load_method(const std::filesystem::path& path);
[[nodiscard]] Method parse_method(std::string_view text, const std::string& name,
                                  const std::filesystem::path& base_dir = {});

// The kinds `veq method new` knows, and the commented template of one.
[[nodiscard]] std::vector<std::string> method_kinds();
[[nodiscard]] std::string method_template(std::string_view kind);  // throws InputError for an unknown kind

}  // namespace veq::method
