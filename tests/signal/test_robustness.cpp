// SPDX-License-Identifier: MIT
// Numerical robustness: odd curves give flags and clear messages, never NaN, never a crash.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include <nlohmann/json.hpp>

#include "support/charge_balance.hpp"
#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace {

veq::Run run_of(const std::vector<double>& v, const std::vector<double>& y, veq::SignalKind kind = veq::SignalKind::ph) {
  veq::Run r;
  r.source = "robust";
  r.signal = kind;
  r.volume_mL = v;
  r.signal_values = y;
  for (std::size_t i = 0; i < v.size(); ++i) r.line.push_back(static_cast<std::uint32_t>(i + 2));
  r.facts.sample_volume_mL = 25.0;
  r.facts.titrant_conc_mol_L = 0.1;
  return r;
}

// Every number the report promises is a number (nlohmann writes NaN and infinity as null).
void check_finite(const veq::Analysis& a) {
  const auto j = nlohmann::json::parse(veq::report::to_json(a));
  for (const char* k : {"noise_sd", "temperature_C"}) CHECK(j["curve"][k].is_number());
  for (const auto& e : j["endpoints"]) {
    for (const char* k : {"volume_mL", "uncertainty_mL", "peak_slope", "snr"}) {
      INFO(k);
      CHECK(e[k].is_number());
    }
    CHECK((e.contains("pH") ? e["pH"].is_number() : e["mV"].is_number()));
    for (const auto& [name, m] : e["methods"].items()) {
      INFO(name);
      CHECK(m["volume_mL"].is_number());
    }
  }
  (void)veq::report::to_text(a);
}

std::vector<double> grid(std::size_t n, double step) {
  std::vector<double> v(n);
  for (std::size_t i = 0; i < n; ++i) v[i] = step * static_cast<double>(i);
  return v;
}

bool has_warning(const veq::Analysis& a, const std::string& code) {
  for (const auto& w : a.warnings) {
    if (w.code == code) return true;
  }
  return false;
}

}  // namespace

TEST_CASE("a flat curve: no endpoint, a flat_curve warning", "[signal][robust]") {
  const auto v = grid(200, 0.1);
  const veq::Analysis a = veq::analyze(run_of(v, std::vector<double>(v.size(), 7.00)));
  CHECK(a.endpoints.endpoints.empty());
  CHECK(has_warning(a, "flat_curve"));
  CHECK(has_warning(a, "no_endpoint"));
  check_finite(a);
}

TEST_CASE("a single ideal step: one endpoint inside the step", "[signal][robust]") {
  const auto v = grid(200, 0.1);
  std::vector<double> y(v.size());
  for (std::size_t i = 0; i < v.size(); ++i) y[i] = v[i] < 10.0 - 1e-9 ? 3.0 : 11.0;
  const veq::Analysis a = veq::analyze(run_of(v, y));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(a.endpoints.endpoints[0].volume_mL > 9.9 - 1e-9);
  CHECK(a.endpoints.endpoints[0].volume_mL < 10.0 + 1e-9);
  check_finite(a);
}

TEST_CASE("pure noise: no endpoint", "[signal][robust]") {
  for (unsigned seed : {1u, 2u, 3u, 4u, 5u}) {
    std::mt19937 rng(seed);
    std::normal_distribution<double> g(7.0, 0.05);
    const auto v = grid(300, 0.1);
    std::vector<double> y(v.size());
    for (double& x : y) x = g(rng);
    const veq::Analysis a = veq::analyze(run_of(v, y));
    INFO("seed " << seed);
    CHECK(a.endpoints.endpoints.empty());
    check_finite(a);
  }
}

TEST_CASE("a reversed titration (acid titrant) and rows in reverse order", "[signal][robust]") {
  veq::test::Sample s;
  s.V0_mL = 25.0;
  s.strong_base = 0.1;
  s.titrant = -0.1;
  std::string text = "Volume (mL);pH\n";
  for (int i = 400; i >= 0; --i) text += std::to_string(0.1 * i) + ";" + std::to_string(veq::test::pH_at_volume(s, 0.1 * i)) + "\n";
  CHECK_THROWS_AS(veq::ingest::parse_run(text, "rev.csv"), veq::InputError);  // volumes go backwards
  veq::ingest::IngestOptions o;
  o.sort_by_volume = true;
  veq::Run r = veq::ingest::parse_run(text, "rev.csv", o);
  r.facts.sample_volume_mL = 25.0;
  const veq::Analysis a = veq::analyze(r);
  CHECK(a.curve.direction == -1);
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - 25.0) < 0.05);  // stoichiometry
  check_finite(a);
}

TEST_CASE("an inverted mV sign: the endpoint is found either way", "[signal][robust]") {
  veq::test::Sample s;
  s.V0_mL = 25.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  const auto v = grid(351, 0.1);
  std::vector<double> normal(v.size()), inverted(v.size());
  for (std::size_t i = 0; i < v.size(); ++i) {
    // E = E0 - s pH with s = 59.16 mV/pH at 25 °C (Nernst), and the same wired the other way.
    normal[i] = 400.0 - 59.16 * veq::test::pH_at_volume(s, v[i]);
    inverted[i] = -normal[i];
  }
  const veq::Analysis a = veq::analyze(run_of(v, normal, veq::SignalKind::mv));
  const veq::Analysis b = veq::analyze(run_of(v, inverted, veq::SignalKind::mv));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  REQUIRE(b.endpoints.endpoints.size() == 1);
  CHECK(a.endpoints.endpoints[0].derivative_volume_mL == Approx(b.endpoints.endpoints[0].derivative_volume_mL).margin(1e-9));
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - 25.0) < 0.05);
  check_finite(a);
  check_finite(b);
}

TEST_CASE("ten thousand identical readings: a clear error, or a flat curve", "[signal][robust]") {
  std::string same = "Volume (mL),pH\n";
  for (int i = 0; i < 10000; ++i) same += "5.00,7.00\n";
  CHECK_THROWS_WITH(veq::ingest::parse_run(same, "same.csv"), Catch::Contains("same volume"));
  const auto v = grid(10000, 0.01);
  const veq::Analysis a = veq::analyze(run_of(v, std::vector<double>(v.size(), 7.0)));
  CHECK(a.endpoints.endpoints.empty());
  check_finite(a);
}

TEST_CASE("a million readings: analysed, one endpoint, finite numbers", "[signal][robust][slow]") {
  // 0.1 mol/L HCl (25 mL) with 0.1 mol/L NaOH, read every 35 uL: the strong acid charge balance
  // in closed form, [H+] = (D + sqrt(D^2 + 4 Kw)) / 2, D = (Ca V0 - Cb V) / (V0 + V) (textbook),
  // pKw 13.995 (CRC Handbook, 25 °C).
  const std::size_t n = 1000000;
  const double kw = std::pow(10.0, -13.995);
  std::vector<double> v(n), y(n);
  for (std::size_t i = 0; i < n; ++i) {
    v[i] = 35.0 * static_cast<double>(i) / static_cast<double>(n - 1);
    const double d = (0.1 * 25.0 - 0.1 * v[i]) / (25.0 + v[i]);
    const double h = d >= 0 ? (d + std::sqrt(d * d + 4 * kw)) / 2 : 2 * kw / (-d + std::sqrt(d * d + 4 * kw));
    y[i] = -std::log10(h);
  }
  const veq::Analysis a = veq::analyze(run_of(v, y));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  CHECK(std::fabs(a.endpoints.endpoints[0].volume_mL - 25.0) < 0.001);
  check_finite(a);
}
