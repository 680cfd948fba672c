// SPDX-License-Identifier: MIT
// The local upload page: an HTTP server on the bench computer over veq::analyze().
#pragma once

#include <cstddef>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

namespace veq::serve {

struct ServeOptions {
  std::string bind_address = "127.0.0.1";  // loopback unless asked otherwise
  int port = 8750;                          // 0: any free port
  std::filesystem::path method_dir;         // methods offered on the page (*.toml); empty: none
  std::size_t max_file_bytes = std::size_t{16} << 20;  // per uploaded file [bytes]
  std::size_t max_files = 200;              // per request
  std::size_t max_request_bytes = std::size_t{64} << 20;  // a whole upload, all files together [bytes]
  std::size_t max_stored_runs = 1000;       // results kept for download, oldest dropped first
  std::size_t max_stored_bytes = std::size_t{256} << 20;  // ... and at most this much of them [bytes]
  int read_timeout_s = 20;                  // per request
  int write_timeout_s = 20;
  int threads = 0;                          // 0: hardware threads

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// True for addresses that only this computer can reach (127.0.0.0/8, ::1, localhost).
[[nodiscard]] bool is_loopback(const std::string& address);

// Runs the server; start() binds and returns the port, stop() ends it.
class Server {
 public:
  explicit Server(ServeOptions options);
  ~Server();
  Server(const Server&) = delete;
  Server& operator=(const Server&) = delete;

  // Binds; returns the bound port. Throws InputError when it cannot bind.
  int bind();
  // Serves until stop() (blocking). Call after bind().
  void run();
  void stop();

 private:
  struct Impl;
  std::unique_ptr<Impl> m_impl;
};

}  // namespace veq::serve
