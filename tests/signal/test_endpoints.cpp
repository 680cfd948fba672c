// SPDX-License-Identifier: MIT
// Derivative endpoints on curves computed in the test from the exact charge balance.
#include <catch2/catch.hpp>
#include <cmath>
#include <random>
#include <vector>

#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "support/runs.hpp"
#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/signal/derivatives.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/prepare.hpp"

using veq::test::grid;
using veq::test::Sample;

namespace {

// 0.1 mol/L HCl, V0 mL, titrated with 0.1 mol/L NaOH: Veq = V0 (stoichiometry).
Sample strong_acid(double V0) {
  Sample s;
  s.V0_mL = V0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  return s;
}

}  // namespace

TEST_CASE("strong acid / strong base, dense data: within 0.02 % of the equivalence volume", "[signal][endpoints]") {
  // Veq placed at several positions within a 0.01 mL dosing step.
  const double V0 = GENERATE(20.0, 20.003, 20.0051, 24.9977);
  const Sample s = strong_acid(V0);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, 0.01)));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const auto& e = a.endpoints.endpoints[0];
  // Stoichiometry: Veq = Ca V0 / Ct.
  CHECK(e.volume_mL == veq::test::close(V0, 2e-4));
  CHECK(e.uncertainty_mL > 0.0);
  CHECK(e.uncertainty_mL < 0.01);
  CHECK(e.flags.empty());
}

TEST_CASE("strong acid / strong base, coarse data: within half a dosing step", "[signal][endpoints]") {
  const double step = 0.5;
  const double V0 = GENERATE(20.0, 20.1, 20.25, 20.4);
  const Sample s = strong_acid(V0);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, step)));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const auto& e = a.endpoints.endpoints[0];
  CHECK(std::fabs(e.volume_mL - V0) <= 0.5 * step);
  CHECK(std::fabs(*e.first_derivative_mL - V0) <= 0.5 * step);
  CHECK(std::fabs(*e.second_derivative_mL - V0) <= 0.5 * step);
}

TEST_CASE("equimolar strong acid / strong base at 25 °C: endpoint pH 7.00 ± 0.02", "[signal][endpoints][reference]") {
  // pKw = 13.995 at 25 °C: CRC Handbook, "Ionization constant of normal water"
  // (Bandura & Lvov 2006); at equivalence [H+] = [OH-], pH = pKw/2 = 6.998.
  const double V0 = GENERATE(20.0, 20.0037, 20.0062);
  const Sample s = strong_acid(V0);
  for (double step : {0.01, 0.05, 0.1}) {
    const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, step)));
    REQUIRE(a.endpoints.endpoints.size() == 1);
    INFO("step " << step);
    CHECK(a.endpoints.endpoints[0].value == veq::test::close(7.00, 0.0, 0.02));
  }
}

TEST_CASE("a two-endpoint curve: both endpoints found", "[signal][endpoints]") {
  // Phosphoric acid, pKa 2.15 / 7.20 / 12.34 (REFERENCES: Fromm; CRC-inorg), 0.05 mol/L
  // in 25 mL with 0.1 mol/L NaOH: endpoints at 12.5 and 25.0 mL (stoichiometry); the
  // third is not seen in water.
  Sample s;
  s.V0_mL = 25.0;
  s.weak = {{0.05, {2.15, 7.20, 12.34}}};
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, 0.05)));
  REQUIRE(a.endpoints.endpoints.size() == 2);
  // The first inflection of a polyprotic acid lies a little off stoichiometry
  // (asymmetric curve; Meites & Meites 1970, from memory): allow 1 %.
  CHECK(a.endpoints.endpoints[0].volume_mL == veq::test::close(12.5, 0.01));
  CHECK(a.endpoints.endpoints[1].volume_mL == veq::test::close(25.0, 0.01));
  // Equivalence pH of the NaH2PO4 and Na2HPO4 points: (pKa1+pKa2)/2 = 4.68 and
  // (pKa2+pKa3)/2 = 9.77 (amphiprotic-salt approximation, textbook); the
  // dilution and the water term shift them by tenths.
  CHECK(a.endpoints.endpoints[0].value == veq::test::close(4.68, 0.0, 0.3));
  CHECK(a.endpoints.endpoints[1].value == veq::test::close(9.77, 0.0, 0.4));
}

TEST_CASE("uneven spacing: dense dosing near the endpoint, coarse elsewhere", "[signal][endpoints]") {
  const double V0 = 20.0037;
  const Sample s = strong_acid(V0);
  std::vector<double> v = grid(0.0, 18.0, 1.0);
  for (double x = 18.5; x < 19.6; x += 0.25) v.push_back(x);
  for (double x = 19.6; x < 20.4; x += 0.02) v.push_back(x);
  for (double x = 20.5; x <= 26.0; x += 0.5) v.push_back(x);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, v));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - V0) <= 0.01);
}

TEST_CASE("acetic acid with strong base: endpoint near pH 8.7", "[signal][endpoints][reference]") {
  // Acetic acid pKa 4.756 (CRC-org); 0.1 mol/L with 0.1 mol/L NaOH: equivalence
  // pH 8.72 (textbook worked value, e.g. Harris; from memory).
  Sample s;
  s.V0_mL = 25.0;
  s.weak = {{0.1, {4.756}}};
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, 0.05)));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(a.endpoints.endpoints[0].volume_mL == veq::test::close(25.0, 2e-3));
  CHECK(a.endpoints.endpoints[0].value == veq::test::close(8.72, 0.0, 0.1));
}

TEST_CASE("strong base titrated with strong acid: falling curve", "[signal][endpoints]") {
  Sample s;
  s.V0_mL = 20.0;
  s.strong_base = 0.1;
  s.titrant = -0.1;
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 30.0, 0.05)));
  CHECK(a.curve.direction == -1);
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - 20.0) <= 0.025);
}

TEST_CASE("noisy data: endpoint still found, noise estimated", "[signal][endpoints]") {
  const double V0 = 20.0;
  const Sample s = strong_acid(V0);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 35.0, 0.1), 0.01, 7));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - V0) <= 0.05);
  // Noise SD 0.01 pH was added; the robust estimate is within a factor 1.5.
  CHECK(a.curve.noise_sd > 0.0067);
  CHECK(a.curve.noise_sd < 0.015);
}

TEST_CASE("a run cut off just past the endpoint is flagged at the edge", "[signal][endpoints]") {
  // Equivalence at 20.02 mL; the last readings are at 20.05 and 20.10 mL.
  const Sample s = strong_acid(20.02);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 20.1, 0.05)));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const auto& f = a.endpoints.endpoints[0].flags;
  CHECK(std::find(f.begin(), f.end(), std::string("edge")) != f.end());
}

TEST_CASE("a run stopped before the endpoint reports none, with the reason", "[signal][endpoints]") {
  const Sample s = strong_acid(20.0);
  const veq::Analysis a = veq::analyze(veq::test::synthetic_run(s, grid(0.0, 19.9, 0.1)));
  CHECK(a.endpoints.endpoints.empty());
  bool warned = false;
  for (const auto& w : a.warnings) warned = warned || w.code == "no_endpoint";
  CHECK(warned);
}

TEST_CASE("an isolated spike is flagged, kept, and does not make an endpoint", "[signal][prepare]") {
  const Sample s = strong_acid(20.0);
  veq::Run r = veq::test::synthetic_run(s, grid(0.0, 30.0, 0.1));
  r.signal_values[50] += 1.0;  // one reading 1 pH unit off at 5.0 mL
  const veq::Analysis a = veq::analyze(r);
  REQUIRE(a.curve.spike.size() == r.volume_mL.size());
  CHECK(a.curve.spike[50] == 1);
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - 20.0) <= 0.05);
  bool warned = false;
  for (const auto& w : a.warnings) warned = warned || (w.code == "spike" && w.where.line == 52);
  CHECK(warned);
}

TEST_CASE("duplicate volumes are merged into their mean", "[signal][prepare]") {
  veq::Run r;
  r.volume_mL = {0, 0, 0, 1, 2, 3};
  r.signal_values = {3.0, 3.2, 3.1, 4, 5, 6};
  r.line = {2, 3, 4, 5, 6, 7};
  const veq::Curve c = veq::signal::prepare(r);
  REQUIRE(c.volume_mL.size() == 4);
  CHECK(c.value[0] == veq::test::close(3.1, 1e-12));
  CHECK(c.line[0] == 2);
}

TEST_CASE("mV runs: endpoints on mV without calibration, pH with one", "[signal][prepare]") {
  // Nernst slope at 25 °C 59.159 mV/pH (RT ln10 / F, CODATA 2018 constants).
  const Sample s = strong_acid(20.0);
  veq::Run r = veq::test::synthetic_run(s, grid(0.0, 30.0, 0.05));
  r.signal = veq::SignalKind::mv;
  for (double& y : r.signal_values) y = 400.0 - 59.159 * y;  // E0 = 400 mV
  const veq::Analysis raw = veq::analyze(r);
  CHECK(raw.curve.signal == veq::SignalKind::mv);
  CHECK(raw.curve.direction == -1);
  REQUIRE(raw.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(raw.endpoints.endpoints[0].volume_mL - 20.0) <= 0.025);
  // Level at the endpoint: E = 400 - 59.159 * 7.00 = -14.1 mV (pH 7.00 ± 0.02).
  CHECK(raw.endpoints.endpoints[0].value == veq::test::close(400.0 - 59.159 * 6.998, 0.0, 1.5));

  veq::AnalyzeOptions o;
  veq::ElectrodeCalibration cal;
  cal.e0_mV = 400.0;
  cal.slope_mV_per_pH = 59.159;
  cal.temperature_C = 25.0;
  o.prepare.electrode = cal;
  const veq::Analysis ph = veq::analyze(r, o);
  CHECK(ph.curve.signal == veq::SignalKind::ph);
  CHECK(ph.curve.value[0] == veq::test::close(veq::test::pH_at_volume(s, 0.0), 1e-9));
  REQUIRE(ph.endpoints.endpoints.size() == 1);
  CHECK(ph.endpoints.endpoints[0].value == veq::test::close(7.0, 0.0, 0.02));
}

TEST_CASE("an E0 line in a file without a temperature holds at the run's temperature", "[signal][prepare]") {
  // Nernst slope RT ln10 / F (CODATA 2018 constants): 59.159 mV/pH at 25 °C, 61.540 at 37 °C. A run at
  // 37 °C read with E = E0 - 61.540 pH; the file says only "E0: 400 mV" (a Nernstian electrode).
  const Sample s = strong_acid(20.0);
  veq::Run r = veq::test::synthetic_run(s, grid(0.0, 30.0, 0.05));
  const double slope37 = 59.159 * (37.0 + 273.15) / 298.15;
  r.signal = veq::SignalKind::mv;
  for (double& y : r.signal_values) y = 400.0 - slope37 * y;
  r.facts.temperature_C = 37.0;  // from a temperature column or --temperature, not the metadata
  veq::ElectrodeCalibration cal;
  cal.e0_mV = 400.0;
  cal.slope_mV_per_pH = 59.159;  // Nernst at the 25 °C metadata parsing assumed
  cal.source = "metadata";
  cal.at_run_temperature = true;
  cal.nernst_fraction = 1.0;
  r.facts.electrode = cal;
  const veq::Analysis a = veq::analyze(r);
  REQUIRE(a.curve.signal == veq::SignalKind::ph);
  CHECK(a.curve.value[0] == veq::test::close(veq::test::pH_at_volume(s, 0.0), 0.0, 1e-3));
  // And read from a file: the same readings with "E0: 400 mV" and no temperature line.
  std::string text = "E0: 400 mV\nVolume (mL),E (mV)\n";
  for (std::size_t i = 0; i < r.volume_mL.size(); ++i)
    text += std::to_string(r.volume_mL[i]) + "," + std::to_string(r.signal_values[i]) + "\n";
  veq::Run f = veq::ingest::parse_run(text, "e0.csv");
  REQUIRE(f.facts.electrode);
  CHECK(f.facts.electrode->at_run_temperature);
  f.facts.temperature_C = 37.0;
  const veq::Analysis b = veq::analyze(f);
  CHECK(b.curve.value[0] == veq::test::close(veq::test::pH_at_volume(s, 0.0), 0.0, 1e-3));
}

TEST_CASE("calibration from two buffers", "[signal][prepare]") {
  // An electrode reading 177.5 mV in pH 4.00 and 0.0 mV in pH 7.00 has a slope of
  // 59.17 mV/pH: 100.0 % of the Nernst slope at 25 °C (59.159 mV, CODATA 2018).
  const veq::ElectrodeCalibration cal = veq::signal::calibration_from_buffers(4.00, 177.5, 7.00, 0.0, 25.0);
  CHECK(cal.slope_mV_per_pH == veq::test::close(59.1667, 1e-4));
  CHECK(cal.e0_mV == veq::test::close(414.1667, 1e-4));
  CHECK_THROWS_AS(veq::signal::calibration_from_buffers(4.0, 100.0, 7.0, 0.0, 25.0), veq::InputError);
}

TEST_CASE("noise estimate of a straight line with Gaussian noise", "[signal][prepare]") {
  std::mt19937 rng(11);
  std::normal_distribution<double> g(0.0, 0.02);
  std::vector<double> v, y;
  for (int i = 0; i < 2000; ++i) {
    v.push_back(0.1 * i + 0.03 * (i % 3));  // uneven spacing
    y.push_back(3.0 + 0.05 * v.back() + g(rng));
  }
  CHECK(veq::signal::estimate_noise(v, y) == veq::test::close(0.02, 0.1));
}

TEST_CASE("derivatives of a quadratic are exact, on any spacing and window", "[signal][derivatives]") {
  std::vector<double> v = {0.0, 0.3, 0.5, 1.2, 1.25, 2.0, 2.9, 3.0, 4.1};
  std::vector<double> y;
  for (double x : v) y.push_back(1.0 + 2.0 * x - 0.5 * x * x);
  for (int w : {2, 4, 6}) {
    const auto d = veq::signal::derivatives(v, y, w, 0.0);
    for (std::size_t i = 0; i < d.mid_mL.size(); ++i) {
      // d/dx (1 + 2x - x^2/2) = 2 - x, exact at the midpoint for a difference quotient too.
      CHECK(d.d1[i] == veq::test::close(2.0 - d.mid_mL[i], 1e-9, 1e-9));
    }
  }
}

TEST_CASE("window rule: narrow for a sharp jump, wider for a broad peak in noise", "[signal][derivatives]") {
  // A sharp strong acid jump (0.1 mol/L HCl, exact charge balance) stands out at once: window 2.
  Sample s = strong_acid(20.0);
  const auto sharp = veq::test::synthetic_run(s, grid(0.0, 30.0, 0.1), 0.005, 3);
  CHECK(veq::signal::auto_window(sharp.volume_mL, sharp.signal_values, 0.005, +1) == 2);
  // A smooth peak read every 0.01 mL with 0.01 pH noise: one difference quotient has an SD of
  // 0.01 x sqrt(2) / 0.01 = 1.4 pH/mL (error propagation), so a wider window is needed.
  std::vector<double> v, y;
  std::mt19937 rng(5);
  std::normal_distribution<double> g(0.0, 0.01);
  for (int i = 0; i <= 1000; ++i) {
    v.push_back(0.01 * i);
    y.push_back(7.0 + std::tanh((v.back() - 5.0) / 2.0) + g(rng));  // peak slope 0.5 pH/mL
  }
  CHECK(veq::signal::auto_window(v, y, 0.01, +1) > 2);
}

TEST_CASE("default options are pinned", "[options]") {
  const veq::signal::EndpointOptions e;
  CHECK(e.window_points == 0);
  CHECK(e.min_relative_height == 0.05);
  CHECK(e.min_prominence == 0.5);
  CHECK(e.min_snr == 8.0);
  CHECK(e.min_separation_mL == 0.0);
  CHECK(e.max_endpoints == 8);
  CHECK(e.validate().empty());
  const veq::signal::PrepareOptions p;
  CHECK(p.spike_threshold_sd == 8.0);
  CHECK(p.min_noise_pH == 1e-4);
  CHECK_FALSE(p.electrode.has_value());
  CHECK(p.validate().empty());
  const veq::ingest::IngestOptions i;
  CHECK(i.max_file_bytes == 64u * 1024u * 1024u);
  CHECK(i.max_line_bytes == 1024u * 1024u);
  CHECK(i.whole_file_limit_bytes == 8u * 1024u * 1024u);
  CHECK(i.min_pH == -2.0);
  CHECK(i.max_pH == 16.0);
  CHECK(i.max_abs_mV == 2000.0);
  CHECK_FALSE(i.sort_by_volume);
  CHECK(i.validate().empty());
}
