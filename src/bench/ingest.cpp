// SPDX-License-Identifier: MIT
// Ingest of a large export: time and peak memory for a ~100 MB pH log, against the numeric data it holds.
#include <sys/resource.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"

namespace {

double peak_rss_mb() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_maxrss) / 1024.0;  // ru_maxrss is in KiB on Linux
}

}  // namespace

int main() {
  const auto path = std::filesystem::temp_directory_path() / "veq_bench_ingest_100mb.csv";
  const std::size_t rows = 6500000;
  {
    // Semicolon-separated with decimal commas, a metadata block, a temperature column:
    // a realistic untidy export, written in chunks so that writing it costs little memory.
    std::ofstream f(path, std::ios::binary);
    f << "Sample: BENCH-1\r\nSample volume: 25 mL\r\n\r\nVolume (mL);pH;Temp/\xC2\xB0" "C\r\n";
    std::string chunk;
    for (std::size_t i = 0; i < rows; ++i) {
      const double v = 70.0 * static_cast<double>(i) / static_cast<double>(rows);
      char line[64];
      const int n = std::snprintf(line, sizeof line, "%.5f;%.3f;25.0\r\n", v, 7.0 + 3.0 * std::tanh((v - 35.0) / 2.0));
      for (int k = 0; k < n; ++k) chunk.push_back(line[k] == '.' ? ',' : line[k]);
      if (chunk.size() > (1u << 20)) f << chunk, chunk.clear();
    }
    f << chunk;
  }
  const double file_mb = static_cast<double>(std::filesystem::file_size(path)) / 1048576.0;
  const double before = peak_rss_mb();
  veq::ingest::IngestOptions o;
  o.max_file_bytes = std::uint64_t{1} << 30;
  const auto t0 = std::chrono::steady_clock::now();
  const veq::Run run = veq::ingest::read_run(path, o);
  const auto t1 = std::chrono::steady_clock::now();
  const double after = peak_rss_mb();
  // The numbers the file holds: three columns of doubles.
  const double numeric_mb = static_cast<double>(run.volume_mL.size()) * 3 * sizeof(double) / 1048576.0;
  std::printf("ingest: %.1f MB file, %zu readings, %.2f s (%.0f MB/s)\n", file_mb, run.volume_mL.size(),
              std::chrono::duration<double>(t1 - t0).count(),
              file_mb / std::chrono::duration<double>(t1 - t0).count());
  std::printf("ingest: peak memory %.0f MB (%.0f MB before), numeric data %.0f MB: %.2f x (target under 3 x)\n",
              after, before, numeric_mb, (after - before) / numeric_mb);
  std::filesystem::remove(path);
  return 0;
}
