// SPDX-License-Identifier: MIT
// Load check of the upload page: 200 concurrent uploads from local clients; none may be lost,
// memory must stay bounded. Prints the figures.
#include <sys/resource.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <thread>
#include <vector>

#include <httplib.h>
#include <nlohmann/json.hpp>

#include "serve/server.hpp"

namespace {

double peak_rss_mb() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_maxrss) / 1024.0;
}

// 0.1 mol/L HCl in 20 mL with 0.1 mol/L NaOH, 300 readings (strong acid charge balance, closed form).
std::string run_text(int i) {
  std::ostringstream f;
  f << "Sample: LOAD-" << i << "\nSample volume: 20 mL\nTitrant: NaOH 0.1 mol/L\nVolume (mL);pH\n";
  const double kw = 1e-14;
  for (int k = 0; k <= 300; ++k) {
    const double v = 0.1 * k;
    const double d = (0.1 * 20.0 - 0.1 * v) / (20.0 + v);
    const double h = d >= 0 ? (d + std::sqrt(d * d + 4 * kw)) / 2 : 2 * kw / (-d + std::sqrt(d * d + 4 * kw));
    f << v << ";" << -std::log10(h) << "\n";
  }
  return f.str();
}

}  // namespace

int main() {
  veq::serve::ServeOptions o;
  o.port = 0;
  veq::serve::Server server(o);
  const int port = server.bind();
  std::thread srv([&] { server.run(); });
  const double before = peak_rss_mb();
  const int clients = 200;
  std::atomic<int> ok{0}, failed{0};
  std::vector<std::thread> threads;
  const auto t0 = std::chrono::steady_clock::now();
  for (int i = 0; i < clients; ++i) {
    threads.emplace_back([&, i] {
      httplib::Client c("127.0.0.1", port);
      c.set_connection_timeout(60, 0);
      c.set_read_timeout(120, 0);
      httplib::MultipartFormDataItems items{{"file", run_text(i), "load.csv", "text/csv"}};
      auto r = c.Post("/api/analyze", items);
      if (r && r->status == 200 && nlohmann::json::parse(r->body)["runs"][0]["status"] == "ok") ++ok;
      else ++failed;
    });
  }
  for (auto& t : threads) t.join();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  server.stop();
  srv.join();
  std::printf("serve: %d concurrent uploads of a 300-reading run: %d answered ok, %d lost or failed, %.2f s (%.0f uploads/s)\n",
              clients, ok.load(), failed.load(), seconds, clients / seconds);
  std::printf("serve: peak memory %.0f MB (%.0f MB before the load)\n", peak_rss_mb(), before);
  return failed == 0 ? 0 : 1;
}
