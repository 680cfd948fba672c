// SPDX-License-Identifier: MIT
// The upload page's HTTP server (cpp-httplib): uploads analysed in memory, results kept for download.
#include "serve/server.hpp"

#include <sys/socket.h>

#include <algorithm>
#include <cctype>
#include <deque>
#include <fstream>
#include <map>
#include <mutex>
#include <random>
#include <thread>

#include <fmt/format.h>
#include <httplib.h>
#include <nlohmann/json.hpp>

#include "data/embedded.hpp"
#include "veq/analyze.hpp"
#include "veq/batch/batch.hpp"
#include "veq/core/constants.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/method/method.hpp"
#include "veq/method/replicates.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/report/summary.hpp"
#include "veq/report/text.hpp"

namespace veq::serve {
namespace {

using nlohmann::ordered_json;

// The page's security headers: no framing, no sniffing, scripts only from this server.
constexpr const char* kPageCsp =
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; frame-ancestors 'none'; "
    "base-uri 'none'; form-action 'self'";
// Reports are self-contained HTML with inline styles and SVG and no scripts at all.
constexpr const char* kReportCsp = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; frame-ancestors 'self'";

void common_headers(httplib::Response& res) {
  res.set_header("X-Content-Type-Options", "nosniff");
  res.set_header("Referrer-Policy", "no-referrer");
  res.set_header("Cache-Control", "no-store");
}

void json_error(httplib::Response& res, int status, const std::string& message) {
  common_headers(res);
  res.status = status;
  res.set_content(ordered_json{{"error", message}}.dump(), "application/json");
}

// A display name for an upload: its last path component, printable, short. Never used as a path.
std::string display_name(const std::string& filename) {
  std::string base = filename;
  const std::size_t slash = base.find_last_of("/\\");
  if (slash != std::string::npos) base = base.substr(slash + 1);
  std::string out;
  for (unsigned char c : base) {
    if (out.size() >= 100) break;
    if (c < 0x20 || c == 0x7F) continue;
    out.push_back(static_cast<char>(c));
  }
  while (!out.empty() && (out.front() == '.' || out.front() == ' ')) out.erase(out.begin());
  return out.empty() ? std::string("upload") : out;
}

struct Entry {
  std::string name;       // display name of the upload
  std::string sample_id;
  std::string json;
  std::string text;
  std::string html;  // the full report; empty for a file that could not be read
  std::string csv_row;
  std::size_t bytes = 0;
};

class Store {
 public:
  Store(std::size_t max_runs, std::size_t max_bytes) : m_max_runs(max_runs), m_max_bytes(max_bytes) {}

  std::string add(Entry e) {
    std::lock_guard<std::mutex> lock(m_mutex);
    const std::string id = new_id();
    e.bytes = e.json.size() + e.text.size() + e.html.size() + e.csv_row.size() + e.name.size();
    m_bytes += e.bytes;
    m_entries.emplace(id, std::move(e));
    m_order.push_back(id);
    while (!m_order.empty() && (m_order.size() > m_max_runs || m_bytes > m_max_bytes)) {
      auto it = m_entries.find(m_order.front());
      if (it != m_entries.end()) {
        m_bytes -= it->second.bytes;
        m_entries.erase(it);
      }
      m_order.pop_front();
    }
    return id;
  }
  std::optional<Entry> get(const std::string& id) {
    std::lock_guard<std::mutex> lock(m_mutex);
    auto it = m_entries.find(id);
    if (it == m_entries.end()) return std::nullopt;
    return it->second;
  }

 private:
  std::string new_id() {
    // 128 random bits: ids cannot be guessed from one another.
    return fmt::format("{:016x}{:016x}", m_rng(), m_rng());
  }
  std::mutex m_mutex;
  std::map<std::string, Entry> m_entries;
  std::deque<std::string> m_order;
  std::size_t m_bytes = 0;
  std::size_t m_max_runs;
  std::size_t m_max_bytes;
  std::mt19937_64 m_rng{std::random_device{}()};
};

std::optional<double> form_number(const httplib::Request& req, const char* key, std::string& error) {
  if (!req.has_file(key) && !req.has_param(key)) return std::nullopt;
  const std::string text = req.has_file(key) ? req.get_file_value(key).content : req.get_param_value(key);
  if (text.empty()) return std::nullopt;
  try {
    std::size_t used = 0;
    const double v = std::stod(text, &used);
    if (used != text.size() || !(v > 0) || !std::isfinite(v)) throw std::invalid_argument("bad");
    return v;
  } catch (const std::exception&) {
    error = std::string("'") + key + "' must be a positive number";
    return std::nullopt;
  }
}

std::string form_text(const httplib::Request& req, const char* key) {
  if (req.has_file(key)) return req.get_file_value(key).content;
  if (req.has_param(key)) return req.get_param_value(key);
  return {};
}

}  // namespace

std::vector<std::string> ServeOptions::validate() const {
  std::vector<std::string> p;
  if (port < 0 || port > 65535) p.push_back(fmt::format("port = {}: expected 0 to 65535", port));
  if (max_file_bytes < 1024) p.push_back("max_file_bytes: must be at least 1 KiB");
  if (max_files < 1) p.push_back("max_files: must be at least 1");
  if (read_timeout_s < 1 || write_timeout_s < 1) p.push_back("timeouts: must be at least 1 s");
  if (!method_dir.empty() && !std::filesystem::is_directory(method_dir)) {
    p.push_back("method folder '" + method_dir.string() + "' does not exist");
  }
  return p;
}

bool is_loopback(const std::string& a) {
  return a == "localhost" || a == "::1" || a.rfind("127.", 0) == 0;
}

struct Server::Impl {
  ServeOptions opt;
  httplib::Server http;
  Store store;
  int port = 0;

  explicit Impl(ServeOptions o) : opt(std::move(o)), store(opt.max_stored_runs, opt.max_stored_bytes) {}

  // Method files offered: *.toml directly in the method folder, by file name only.
  std::vector<std::string> method_names() const {
    std::vector<std::string> names;
    if (opt.method_dir.empty()) return names;
    std::error_code ec;
    for (const auto& e : std::filesystem::directory_iterator(opt.method_dir, ec)) {
      if (e.is_regular_file() && e.path().extension() == ".toml") {
        // Only method files, not the titer records that sit beside them.
        std::ifstream in(e.path());
        std::string first;
        std::getline(in, first);
        if (first.rfind("# veq titer record", 0) == 0) continue;
        names.push_back(e.path().filename().string());
      }
    }
    std::sort(names.begin(), names.end());
    return names;
  }

  int listen_fd = -1;  // the listening socket, seen when it is created

  void setup() {
    // cpp-httplib as Debian builds it listens with a backlog of 5, which drops
    // connections under a burst of uploads; keep the socket so that bind() can
    // raise the backlog (listen() on a listening socket only changes it).
    http.set_socket_options([this](socket_t sock) {
      int yes = 1;
      ::setsockopt(sock, SOL_SOCKET, SO_REUSEADDR, &yes, sizeof yes);
      listen_fd = sock;
    });
    // The whole request is held in memory while it is read: bound it (per thread).
    http.set_payload_max_length(std::min(opt.max_request_bytes, opt.max_file_bytes * opt.max_files + (64u << 10)));
    http.set_read_timeout(opt.read_timeout_s, 0);
    http.set_write_timeout(opt.write_timeout_s, 0);
    http.set_keep_alive_timeout(5);
    const unsigned threads = opt.threads > 0 ? static_cast<unsigned>(opt.threads) : std::max(2u, std::thread::hardware_concurrency());
    http.new_task_queue = [threads] { return new httplib::ThreadPool(threads); };
    http.set_exception_handler([](const httplib::Request&, httplib::Response& res, std::exception_ptr) {
      json_error(res, 500, "internal error in veq (a bug; please report it with the file)");
    });
    http.set_error_handler([](const httplib::Request&, httplib::Response& res) {
      if (!res.body.empty()) return;
      const std::string msg = res.status == 413 ? "upload too large" : res.status == 404 ? "no such page" : "bad request";
      json_error(res, res.status, msg);
    });

    auto asset = [](const char* name, const char* type) {
      return [name, type](const httplib::Request&, httplib::Response& res) {
        const auto text = data::embedded(name);
        if (!text) return json_error(res, 404, "no such page");
        common_headers(res);
        res.set_header("Content-Security-Policy", kPageCsp);
        res.set_header("X-Frame-Options", "DENY");
        res.set_content(std::string(*text), type);
      };
    };
    http.Get("/", asset("page.html", "text/html; charset=utf-8"));
    http.Get("/app.js", asset("app.js", "text/javascript; charset=utf-8"));
    http.Get("/app.css", asset("app.css", "text/css; charset=utf-8"));

    http.Get("/api/methods", [this](const httplib::Request&, httplib::Response& res) {
      common_headers(res);
      ordered_json j = ordered_json::array();
      for (const auto& n : method_names()) {
        ordered_json m{{"file", n}};
        try {
          m["name"] = method::load_method(opt.method_dir / n).name;
        } catch (const InputError& e) {
          m["error"] = e.what();
        }
        j.push_back(m);
      }
      res.set_content(ordered_json{{"methods", j}}.dump(), "application/json");
    });

    http.Post("/api/analyze", [this](const httplib::Request& req, httplib::Response& res) { analyze(req, res); });

    http.Get(R"(/report/([0-9a-f]{32}))", [this](const httplib::Request& req, httplib::Response& res) {
      const auto e = store.get(req.matches[1]);
      if (!e || e->html.empty()) return json_error(res, 404, "no such report (results are kept for a limited time)");
      common_headers(res);
      res.set_header("Content-Security-Policy", kReportCsp);
      res.set_content(e->html, "text/html; charset=utf-8");
    });

    http.Get(R"(/api/run/([0-9a-f]{32})\.(json|txt|html))", [this](const httplib::Request& req, httplib::Response& res) {
      const auto e = store.get(req.matches[1]);
      if (!e) return json_error(res, 404, "no such result (results are kept for a limited time)");
      common_headers(res);
      const std::string kind = req.matches[2];
      std::string stem;
      for (char c : e->sample_id) stem.push_back(std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '_' ? c : '_');
      if (stem.empty()) stem = "run";
      res.set_header("Content-Disposition", "attachment; filename=\"" + stem + "." + kind + "\"");
      if (kind == "json") {
        res.set_content(e->json, "application/json");
      } else if (kind == "html") {
        if (e->html.empty()) return json_error(res, 404, "no report for a file that could not be read");
        res.set_header("Content-Security-Policy", kReportCsp);
        res.set_content(e->html, "text/html; charset=utf-8");
      } else {
        res.set_content(e->text, "text/plain; charset=utf-8");
      }
    });

    http.Get("/api/results.csv", [this](const httplib::Request& req, httplib::Response& res) {
      common_headers(res);
      std::string out = report::summary_csv_header();
      const std::string ids = req.get_param_value("ids");
      std::size_t start = 0, count = 0;
      while (start <= ids.size() && count < 10000) {
        const std::size_t comma = ids.find(',', start);
        const std::string id = ids.substr(start, comma == std::string::npos ? std::string::npos : comma - start);
        if (auto e = store.get(id)) out += e->csv_row;
        if (comma == std::string::npos) break;
        start = comma + 1;
        ++count;
      }
      res.set_header("Content-Disposition", "attachment; filename=\"veq-results.csv\"");
      res.set_content(out, "text/csv; charset=utf-8");
    });
  }

  void analyze(const httplib::Request& req, httplib::Response& res) {
    if (!req.is_multipart_form_data()) return json_error(res, 400, "expected a multipart/form-data upload with 'file' fields");
    const auto range = req.files.equal_range("file");
    const auto n_files = static_cast<std::size_t>(std::distance(range.first, range.second));
    if (n_files == 0) return json_error(res, 400, "no file uploaded (field 'file')");
    if (n_files > opt.max_files) return json_error(res, 413, fmt::format("at most {} files per upload", opt.max_files));
    std::string error;
    const auto sample_volume = form_number(req, "sample_volume", error);
    const auto titrant_conc = form_number(req, "titrant_conc", error);
    if (!error.empty()) return json_error(res, 400, error);
    const std::string titrant = form_text(req, "titrant");
    if (!titrant.empty() && titrant != "acid" && titrant != "base") return json_error(res, 400, "'titrant' must be acid or base");
    std::optional<method::Method> method;
    const std::string method_name = form_text(req, "method");
    if (!method_name.empty()) {
      const auto names = method_names();
      // Only a name from the folder's list; never a path from the request.
      if (std::find(names.begin(), names.end(), method_name) == names.end()) {
        return json_error(res, 400, "no such method on this server");
      }
      try {
        method = method::load_method(opt.method_dir / method_name);
      } catch (const InputError& e) {
        return json_error(res, 422, std::string("the method cannot be used: ") + e.what());
      }
    }
    ordered_json runs = ordered_json::array();
    std::vector<Analysis> done;
    std::map<std::uint64_t, std::string> seen;  // content hash -> first file with it
    for (auto it = range.first; it != range.second; ++it) {
      const httplib::MultipartFormData& f = it->second;
      const std::string name = display_name(f.filename);
      ordered_json r;
      r["file"] = name;
      // The same file twice is not two replicates.
      const std::uint64_t hash = batch::hash64(f.content);
      const auto dup = seen.find(hash);
      const bool duplicate = dup != seen.end();
      if (duplicate) r["duplicate_of"] = dup->second;
      else seen.emplace(hash, name);
      Entry entry;
      entry.name = name;
      try {
        if (f.content.size() > opt.max_file_bytes) {
          throw InputError({name, 0, 0}, fmt::format("file is larger than the {} MiB upload limit", opt.max_file_bytes >> 20));
        }
        ingest::IngestOptions io;
        io.max_file_bytes = opt.max_file_bytes;
        Run run = ingest::parse_run(f.content, name, io);
        if (sample_volume) run.facts.sample_volume_mL = sample_volume;
        if (titrant_conc) run.facts.titrant_conc_mol_L = titrant_conc;
        if (titrant == "acid") run.facts.titrant_kind = TitrantKind::acid;
        if (titrant == "base") run.facts.titrant_kind = TitrantKind::base;
        AnalyzeOptions ao;
        ao.method = method;
        Analysis a = veq::analyze(std::move(run), ao);
        entry.sample_id = a.run.facts.sample_id;
        entry.json = report::to_json(a);
        entry.text = report::to_text(a);
        entry.html = report::to_html(a);
        r["sample_id"] = a.run.facts.sample_id;
        const auto full = ordered_json::parse(entry.json);
        r["endpoints"] = full["endpoints"];
        r["results"] = full.contains("results") ? full["results"] : ordered_json::array();
        if (!a.results_error.empty()) r["result_error"] = a.results_error;
        r["warnings"] = full["warnings"];
        // The same row and status as veq batch writes for this run.
        batch::RunStatus status = batch::RunStatus::ok;
        const report::SummaryRow row = batch::summary_row_of(a, name, status);
        r["status"] = std::string(batch::to_string(status));
        entry.csv_row = report::summary_csv_row(row);
        if (!duplicate) done.push_back(std::move(a));
      } catch (const InputError& e) {
        r["status"] = std::string(batch::to_string(batch::RunStatus::input_error));
        r["error"] = e.what();
        if (!e.hint().empty()) r["hint"] = e.hint();
        entry.json = ordered_json{{"error", e.what()}, {"hint", e.hint()}}.dump(2) + "\n";
        entry.text = std::string("veq: error: ") + e.what() + "\n";
        report::SummaryRow row;
        row.file = name;
        row.status = std::string(batch::to_string(batch::RunStatus::input_error));
        row.error = e.what();
        entry.csv_row = report::summary_csv_row(row);
      }
      const std::string id = store.add(std::move(entry));
      r["id"] = id;
      r["downloads"] = {{"json", "/api/run/" + id + ".json"}, {"text", "/api/run/" + id + ".txt"}};
      if (r["status"] != "input_error") {
        r["downloads"]["html"] = "/api/run/" + id + ".html";
        r["report"] = "/report/" + id;
      }
      runs.push_back(r);
    }
    // Replicates: results grouped by sample id.
    ordered_json reps = ordered_json::array();
    std::map<std::pair<std::string, std::string>, std::vector<double>> groups;
    for (const auto& a : done) {
      if (!a.results) continue;
      for (const auto& r : a.results->results) groups[{a.run.facts.sample_id, r.name}].push_back(r.value);
    }
    for (const auto& [key, values] : groups) {
      if (values.size() < 2) continue;
      const auto s = method::replicate_stats(values);
      reps.push_back({{"sample_id", key.first}, {"result", key.second}, {"n", s.n}, {"mean", s.mean}, {"sd", s.sd},
                      {"rsd_percent", s.rsd_percent}, {"ci95", {s.ci95_low, s.ci95_high}},
                      {"outlier", s.outlier ? ordered_json(*s.outlier) : ordered_json(nullptr)}});
    }
    common_headers(res);
    res.set_content(ordered_json{{"runs", runs}, {"replicates", reps}, {"caution", report::safety_caution()}}.dump(),
                    "application/json");
  }
};

Server::Server(ServeOptions options) : m_impl(std::make_unique<Impl>(std::move(options))) {
  if (const auto p = m_impl->opt.validate(); !p.empty()) throw InputError({"veq serve", 0, 0}, p.front());
  m_impl->setup();
}

Server::~Server() { stop(); }

int Server::bind() {
  if (m_impl->opt.port == 0) {
    m_impl->port = m_impl->http.bind_to_any_port(m_impl->opt.bind_address);
  } else {
    m_impl->port = m_impl->http.bind_to_port(m_impl->opt.bind_address, m_impl->opt.port) ? m_impl->opt.port : -1;
  }
  if (m_impl->port > 0 && m_impl->listen_fd >= 0) ::listen(m_impl->listen_fd, SOMAXCONN);
  if (m_impl->port <= 0) {
    throw InputError({"veq serve", 0, 0},
                     fmt::format("cannot listen on {}:{}", m_impl->opt.bind_address, m_impl->opt.port),
                     "the port may be in use: choose another with --port");
  }
  return m_impl->port;
}

void Server::run() { m_impl->http.listen_after_bind(); }

void Server::stop() {
  if (m_impl) m_impl->http.stop();
}

}  // namespace veq::serve
