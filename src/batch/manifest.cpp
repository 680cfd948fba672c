// SPDX-License-Identifier: MIT
// Manifests and summary rows: built when a run is processed, read back for resuming and for the summaries.
#include "batch/manifest.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <iterator>
#include <vector>

#include "batch/files.hpp"
#include "report/svg.hpp"
#include "veq/method/method.hpp"

namespace veq::batch::detail {

namespace fs = std::filesystem;

namespace {

// Numbers separated by spaces (and commas within a point); nullopt on anything else.
std::optional<std::vector<double>> numbers(const std::string& text) {
  std::vector<double> v;
  const char* p = text.data();
  const char* end = p + text.size();
  while (p < end) {
    double x = 0;
    const auto [q, ec] = std::from_chars(p, end, x);
    if (ec != std::errc() || !std::isfinite(x)) return std::nullopt;
    v.push_back(x);
    p = q;
    if (p < end && (*p == ' ' || *p == ',')) ++p;
  }
  return v;
}

// A string as it reads back from JSON written with invalid UTF-8 replaced.
std::string as_written(const std::string& text) {
  const std::string dumped = ordered_json(text).dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
  return ordered_json::parse(dumped).get<std::string>();
}

}  // namespace

ordered_json rounded(double x, int decimals) {
  if (!std::isfinite(x)) return nullptr;
  const double scale = std::pow(10.0, decimals);
  double r = std::round(x * scale) / scale;
  if (r == 0.0) r = 0.0;
  return r;
}

int decimals_for(double u) {
  if (!(u > 0) || !std::isfinite(u)) return 3;
  return std::clamp(1 - static_cast<int>(std::floor(std::log10(u))), 2, 6);
}

std::string ingest_fingerprint(const ingest::IngestOptions& o) {
  auto opt = [](const std::optional<std::size_t>& v) { return v ? std::to_string(*v) : std::string("-"); };
  return fmt::format(
      "max_file_bytes={};max_line_bytes={};columns={},{},{},{};volume_unit={};signal={};sort={};"
      "pH={:.17g}..{:.17g};mV={:.17g}",
      o.max_file_bytes,
      o.max_line_bytes,
      opt(o.columns.volume),
      opt(o.columns.signal),
      opt(o.columns.temperature),
      opt(o.columns.time),
      o.volume_unit.value_or("-"),
      o.signal ? std::string(to_string(*o.signal)) : std::string("-"),
      o.sort_by_volume,
      o.min_pH,
      o.max_pH,
      o.max_abs_mV);
}

// A thumbnail in the manifest: "x,y x,y ..." in pixels to 0.1 px (one string
// parses far faster than an array of arrays when 10,000 manifests are read back).
ordered_json thumbnail_json(const report::Thumbnail& t) {
  std::string pts, eps;
  // Tenths by the SVG writer's integer formatting (no string per point, no float formatting).
  for (const auto& [x, y] : t.points_px) {
    if (!pts.empty()) pts += ' ';
    report::svg::append_coord(pts, x);
    pts += ',';
    report::svg::append_coord(pts, y);
  }
  for (const double x : t.endpoints_px) {
    if (!eps.empty()) eps += ' ';
    report::svg::append_coord(eps, x);
  }
  return {{"points", pts}, {"endpoints", eps}};
}

// Read back from a manifest; the numbers are checked, and the SVG is drawn from them anew.
std::optional<report::Thumbnail> thumbnail_from(const ordered_json& j) {
  if (!j.is_object() || !j.contains("points") || !j["points"].is_string()) return std::nullopt;
  const auto pts = numbers(j["points"].get<std::string>());
  if (!pts || pts->size() % 2 != 0) return std::nullopt;
  report::Thumbnail t;
  for (std::size_t i = 0; i + 1 < pts->size(); i += 2) t.points_px.emplace_back((*pts)[i], (*pts)[i + 1]);
  if (j.contains("endpoints") && j["endpoints"].is_string()) {
    if (const auto eps = numbers(j["endpoints"].get<std::string>())) t.endpoints_px = *eps;
  }
  return t;
}

// What the summaries need of an analysed run.
ordered_json analysed_row(const Analysis& a, RunStatus& status) {
  const auto& eps = a.endpoints.endpoints;
  std::string result, flags, error;
  ordered_json list = ordered_json::array();
  const bool ph = a.curve.signal == SignalKind::ph;
  for (const auto& e : eps) {
    const int d = decimals_for(e.uncertainty_mL);
    result += fmt::format("{}{:.{}f} +/- {:.{}f} mL", result.empty() ? "" : "; ", e.volume_mL, d, e.uncertainty_mL, d);
    if (!e.flags.empty()) {
      flags += fmt::format("{}EP{}", flags.empty() ? "" : "; ", e.index);
      for (const auto& f : e.flags) flags += " " + f;
    }
    ordered_json ej;
    ej["index"] = e.index;
    ej["volume_mL"] = rounded(e.volume_mL, 6);
    ej["uncertainty_mL"] = rounded(e.uncertainty_mL, 6);
    ej[ph ? "pH" : "mV"] = rounded(e.value, ph ? 4 : 3);
    ej["flags"] = e.flags;
    list.push_back(std::move(ej));
  }
  if (eps.empty()) {
    status = RunStatus::no_endpoint;
    error = "no endpoint found";
    for (const auto& w : a.endpoints.warnings) {
      if (w.code == "no_endpoint" || w.code == "too_few_readings") error = w.message;
    }
  } else {
    status = flags.empty() ? RunStatus::ok : RunStatus::flagged;
  }
  // With a method the result column holds the reportable results instead of the volumes.
  ordered_json values = ordered_json::array();
  if (a.results) {
    for (const auto& r : a.results->results) {
      values.push_back({{"name", r.name}, {"value", r.value}, {"unit", std::string(method::to_string(r.unit))}});
    }
    std::string res;
    for (const auto& r : a.results->results) {
      res += fmt::format("{}{} = {:.{}f} {} (U = {:.{}f}, k = 2){}",
                         res.empty() ? "" : "; ",
                         r.name,
                         r.value,
                         r.decimals,
                         method::to_string(r.unit),
                         r.expanded_uncertainty,
                         r.decimals,
                         r.verdict.empty() ? "" : " " + r.verdict);
    }
    result = res;
    if (!eps.empty()) {
      bool out_of_spec = false;
      for (const auto& r : a.results->results) out_of_spec = out_of_spec || r.verdict == "fail";
      if (!a.results->acceptance_failures.empty()) {
        status = RunStatus::no_result;
        for (const auto& f : a.results->acceptance_failures) error += (error.empty() ? "acceptance: " : "; ") + f;
      } else if (out_of_spec) {
        status = RunStatus::out_of_spec;
        for (const auto& r : a.results->results) {
          if (r.verdict == "fail")
            error += fmt::format("{}{} outside its specification", error.empty() ? "" : "; ", r.name);
        }
      }
      // The method and the run disagree about a fact: flagged, and said whatever the status (a result out of
      // specification may be the method's sample volume, not the sample).
      if (!a.results->conflicts.empty()) {
        if (status == RunStatus::ok) status = RunStatus::flagged;
        flags += std::string(flags.empty() ? "" : "; ") + "method_conflict";
        if (status == RunStatus::out_of_spec || status == RunStatus::no_result) {
          for (const auto& c : a.results->conflicts) error += (error.empty() ? "" : "; ") + c;
        }
      }
    }
  } else if (!a.results_error.empty() && !eps.empty()) {
    status = RunStatus::no_result;
    error = a.results_error;
    result.clear();
  }
  ordered_json row;
  row["id"] = a.run.facts.sample_id;
  row["status"] = std::string(to_string(status));
  row["endpoints"] = std::move(list);
  row["result"] = std::move(result);
  row["flags"] = std::move(flags);
  row["error"] = std::move(error);
  if (!values.empty()) row["results"] = values;  // for replicate statistics
  return row;
}

ordered_json failed_row(RunStatus status, const std::string& error) {
  ordered_json row;
  row["id"] = "";
  row["status"] = std::string(to_string(status));
  row["endpoints"] = ordered_json::array();
  row["result"] = "";
  row["flags"] = "";
  row["error"] = error;
  return row;
}

std::string error_text(const InputError& e) {
  std::string s = e.what();
  if (!e.hint().empty()) s += " (hint: " + e.hint() + ")";
  return s;
}

std::string result_name(const std::string& stem) {
  return stem + std::string(kResultExtension);
}

std::string report_name(const std::string& stem) {
  return stem + std::string(kReportExtension);
}

namespace {

std::string string_field(const ordered_json& m, const char* key) {
  return m.contains(key) && m[key].is_string() ? m[key].get<std::string>() : std::string();
}

struct ListedOutput {
  std::string name;
  std::string xxh3;  // empty when not recorded
};

// The outputs a manifest lists, when they are well formed and are the stem's files; nullopt otherwise.
std::optional<std::vector<ListedOutput>> listed_outputs(const ordered_json& m, const std::string& stem) {
  if (!m.contains("outputs") || !m["outputs"].is_object()) return std::nullopt;
  std::vector<ListedOutput> out;
  for (const auto& [kind, o] : m["outputs"].items()) {
    (void)kind;
    if (!o.is_object() || !o.contains("name") || !o["name"].is_string()) return std::nullopt;
    ListedOutput l{o["name"].get<std::string>(), string_field(o, "xxh3")};
    if (l.name != result_name(stem) && l.name != report_name(stem)) return std::nullopt;
    out.push_back(std::move(l));
  }
  return out;
}

}  // namespace

bool keeps_unlisted(const ordered_json& m, const fs::path& runs_dir, const std::string& stem) {
  if (string_field(m, "schema") != kManifestSchema || string_field(m, "stem") != stem) return false;
  const auto outputs = listed_outputs(m, stem);
  if (!outputs || outputs->empty()) return false;
  for (const auto& o : *outputs) {
    std::error_code ec;
    if (!fs::exists(runs_dir / o.name, ec)) return false;
  }
  return true;
}

bool still_valid(const ordered_json& m, const ManifestKey& key, const fs::path& runs_dir, const std::string& stem) {
  const auto str = [&](const char* k) { return string_field(m, k); };
  if (str("schema") != kManifestSchema || str("stem") != stem || str("veq_version") != version() ||
      str("file") != as_written(key.file)) {
    return false;
  }
  if (str("method") != key.method || str("settings") != key.settings) return false;
  if (!m.contains("html") || !m["html"].is_boolean() || m["html"].get<bool>() != key.html) return false;
  if (!m.contains("source") || !m["source"].is_object()) return false;
  const auto& src = m["source"];
  if (!src.contains("bytes") || !src["bytes"].is_number_unsigned() ||
      src["bytes"].get<std::uint64_t>() != key.source_bytes) {
    return false;
  }
  if (!src.contains("xxh3") || !src["xxh3"].is_string() || src["xxh3"].get<std::string>() != key.source_xxh3) {
    return false;
  }
  if (!m.contains("row") || !m["row"].is_object() || !m["row"].contains("status") ||
      !status_from_string(m["row"]["status"].is_string() ? m["row"]["status"].get<std::string>() : "")) {
    return false;
  }
  const auto outputs = listed_outputs(m, stem);
  if (!outputs) return false;
  for (const auto& o : *outputs) {
    if (o.xxh3.empty() || hash_of_file(runs_dir / o.name) != o.xxh3) return false;
  }
  return true;
}

// summary.json is written a run at a time; each entry is indented to sit in the "runs" array.
std::string indent(const std::string& text, std::string_view by) {
  std::string out(by);
  for (const char c : text) {
    out += c;
    if (c == '\n') out += by;
  }
  return out;
}

report::SummaryRow row_from(const ordered_json& row,
                            const std::string& rel,
                            const std::string& stem,
                            const ordered_json* manifest) {
  auto s = [&](const char* k) {
    return row.contains(k) && row[k].is_string() ? row[k].get<std::string>() : std::string();
  };
  report::SummaryRow r;
  r.id = s("id");
  r.file = rel;
  r.status = s("status");
  r.endpoints =
      row.contains("endpoints") && row["endpoints"].is_array() ? static_cast<int>(row["endpoints"].size()) : 0;
  r.result = s("result");
  r.flags = s("flags");
  r.error = s("error");
  if (manifest != nullptr && manifest->contains("outputs") && (*manifest)["outputs"].contains("html")) {
    r.report_href = fmt::format("{}/{}", kRunsFolder, report_name(stem));
  }
  if (manifest != nullptr && manifest->contains("thumbnail")) r.thumbnail = thumbnail_from((*manifest)["thumbnail"]);
  return r;
}

ordered_json json_entry(const ordered_json& row,
                        const std::string& rel,
                        const std::string& stem,
                        const ordered_json* manifest) {
  ordered_json e;
  e["file"] = rel;
  for (const char* k : {"id", "status", "endpoints", "result", "flags", "error"})
    e[k] = row.contains(k) ? row[k] : nullptr;
  if (row.contains("results")) e["results"] = row["results"];
  e["report"] = nullptr;
  e["json"] = nullptr;
  if (manifest != nullptr && manifest->contains("outputs")) {
    const auto& o = (*manifest)["outputs"];
    if (o.contains("html")) e["report"] = fmt::format("{}/{}", kRunsFolder, report_name(stem));
    if (o.contains("json")) e["json"] = fmt::format("{}/{}", kRunsFolder, result_name(stem));
  }
  return e;
}

}  // namespace veq::batch::detail

namespace veq::batch {

report::SummaryRow summary_row_of(const Analysis& analysis, const std::string& file, RunStatus& status) {
  const auto row = detail::analysed_row(analysis, status);
  return detail::row_from(row, file, std::string(), nullptr);
}

}  // namespace veq::batch
