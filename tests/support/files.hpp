// SPDX-License-Identifier: MIT
// Scratch folders and whole-folder snapshots for tests that write files.
#pragma once

#include <filesystem>
#include <fstream>
#include <map>
#include <string>

namespace veq::test {

// An empty folder under the system's temporary folder (removed first if it exists).
inline std::filesystem::path fresh_dir(const std::string& name) {
  const std::filesystem::path d = std::filesystem::temp_directory_path() / "veq_tests" / name;
  std::filesystem::remove_all(d);
  std::filesystem::create_directories(d);
  return d;
}

inline void write_file(const std::filesystem::path& p, const std::string& bytes) {
  std::filesystem::create_directories(p.parent_path());
  std::ofstream(p, std::ios::binary) << bytes;
}

inline std::string slurp(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// Every regular file under dir (relative '/' path -> bytes), in path order.
inline std::map<std::string, std::string> snapshot(const std::filesystem::path& dir) {
  std::map<std::string, std::string> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) {
    if (e.is_regular_file()) files[e.path().lexically_relative(dir).generic_string()] = slurp(e.path());
  }
  return files;
}

}  // namespace veq::test
