// SPDX-License-Identifier: MIT
// The upload page over HTTP: good and bad uploads, limits, hostile names and text, malformed requests.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <thread>

#include <httplib.h>
#include <nlohmann/json.hpp>

#include "serve/server.hpp"
#include "support/charge_balance.hpp"

namespace fs = std::filesystem;

namespace {

// A server on a free loopback port for the length of one test.
struct Running {
  veq::serve::Server server;
  int port;
  std::thread thread;
  explicit Running(veq::serve::ServeOptions o) : server([&] {
                                                   o.port = 0;
                                                   return o;
                                                 }()),
                                                 port(server.bind()),
                                                 thread([this] { server.run(); }) {}
  ~Running() {
    server.stop();
    thread.join();
  }
  httplib::Client client() const {
    httplib::Client c("127.0.0.1", port);
    c.set_read_timeout(30, 0);
    return c;
  }
};

// 0.1 mol/L HCl (20 mL) with 0.1 mol/L NaOH every 0.1 mL, from the charge balance: Veq = 20.00 mL.
std::string good_run(const std::string& extra_metadata = {}) {
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  std::ostringstream f;
  f << "Sample: WEB-1\nSample volume: 20 mL\nTitrant: NaOH 0.1 mol/L\n" << extra_metadata << "Volume (mL);pH\n";
  for (int i = 0; i <= 300; ++i) f << 0.1 * i << ";" << veq::test::pH_at_volume(s, 0.1 * i) << "\n";
  return f.str();
}

httplib::MultipartFormDataItems files(std::initializer_list<std::pair<std::string, std::string>> named) {
  httplib::MultipartFormDataItems items;
  for (const auto& [name, content] : named) items.push_back({"file", content, name, "text/csv"});
  return items;
}

}  // namespace

TEST_CASE("upload page: the page and its assets, with security headers", "[serve]") {
  Running srv({});
  auto c = srv.client();
  auto page = c.Get("/");
  REQUIRE(page);
  CHECK(page->status == 200);
  CHECK(page->body.find("Caution") != std::string::npos);  // the safety caution is on the page
  CHECK(page->get_header_value("Content-Security-Policy").find("script-src 'self'") != std::string::npos);
  CHECK(page->get_header_value("X-Content-Type-Options") == "nosniff");
  auto js = c.Get("/app.js");
  REQUIRE(js);
  CHECK(js->status == 200);
  CHECK(js->body.find("innerHTML") == std::string::npos);  // results are inserted as text, never as HTML
  auto missing = c.Get("/no/such/page");
  REQUIRE(missing);
  CHECK(missing->status == 404);
}

TEST_CASE("upload page: good and bad files in one upload", "[serve]") {
  Running srv({});
  auto c = srv.client();
  auto r = c.Post("/api/analyze", files({{"good.csv", good_run()}, {"bad.csv", "Volume (mL);pH\n0;3.1\n1;abc\n2;8.7\n"}}));
  REQUIRE(r);
  REQUIRE(r->status == 200);
  const auto j = nlohmann::json::parse(r->body);
  REQUIRE(j["runs"].size() == 2);
  const auto& good = j["runs"][0];
  CHECK(good["status"] == "ok");
  REQUIRE(good["endpoints"].size() == 1);
  CHECK(std::fabs(good["endpoints"][0]["volume_mL"].get<double>() - 20.0) < 0.01);  // stoichiometry
  const auto& bad = j["runs"][1];
  CHECK(bad["status"] == "input_error");  // the same status names as veq batch
  CHECK(bad["error"].get<std::string>().rfind("bad.csv:3:", 0) == 0);  // file:line of the bad cell
  // Downloads of the stored result.
  auto json = c.Get(good["downloads"]["json"].get<std::string>().c_str());
  REQUIRE(json);
  CHECK(json->status == 200);
  CHECK(nlohmann::json::parse(json->body)["schema"] == "veq.run/1");
  auto csv = c.Get(("/api/results.csv?ids=" + good["id"].get<std::string>() + "," + bad["id"].get<std::string>()).c_str());
  REQUIRE(csv);
  CHECK(csv->body.rfind("id,file,status,endpoints,result,flags,error\r\n", 0) == 0);  // summary.csv's columns
  CHECK(csv->body.find("WEB-1,good.csv,ok,1,") != std::string::npos);
  CHECK(c.Get("/api/run/0123456789abcdef0123456789abcdef.json")->status == 404);
}

TEST_CASE("upload page: facts from the form win over the file", "[serve]") {
  Running srv({});
  auto c = srv.client();
  auto items = files({{"run.csv", good_run()}});
  items.push_back({"sample_volume", "25", "", ""});
  auto r = c.Post("/api/analyze", items);
  REQUIRE(r);
  REQUIRE(r->status == 200);
  const auto run = nlohmann::json::parse(c.Get(nlohmann::json::parse(r->body)["runs"][0]["downloads"]["json"].get<std::string>().c_str())->body);
  CHECK(run["run"]["facts"]["sample_volume_mL"] == 25.0);
  items.back().content = "-3";
  CHECK(c.Post("/api/analyze", items)->status == 400);
}

TEST_CASE("upload page: oversize files and requests are refused with a message", "[serve]") {
  veq::serve::ServeOptions o;
  o.max_file_bytes = 4096;
  o.max_request_bytes = 100000;
  Running srv(o);
  auto c = srv.client();
  // One file over the per-file limit: that file fails, the request does not.
  auto r = c.Post("/api/analyze", files({{"big.csv", std::string(8000, '\n') + good_run()}, {"ok.csv", "V (mL),pH\n0,3\n1,4\n2,5\n3,9\n4,11\n5,11.2\n"}}));
  REQUIRE(r);
  REQUIRE(r->status == 200);
  const auto j = nlohmann::json::parse(r->body);
  CHECK(j["runs"][0]["status"] == "input_error");
  CHECK(j["runs"][0]["error"].get<std::string>().find("limit") != std::string::npos);
  // A request larger than the server takes at all: 413, the server stays up.
  auto huge = c.Post("/api/analyze", files({{"huge.csv", std::string(200000, '1')}}));
  REQUIRE(huge);
  CHECK(huge->status == 413);
  CHECK(c.Get("/")->status == 200);
}

TEST_CASE("upload page: malformed requests get a 4xx and never crash the server", "[serve]") {
  Running srv({});
  auto c = srv.client();
  CHECK(c.Post("/api/analyze", "not a form", "text/plain")->status == 400);
  CHECK(c.Post("/api/analyze", "--x\r\nContent-Disposition: form-data; name=\"file\"\r\n\r\nabc", "multipart/form-data; boundary=x")
            ->status >= 400);
  CHECK(c.Post("/api/analyze", "", "multipart/form-data; boundary=zzz")->status >= 400);
  httplib::MultipartFormDataItems none;
  none.push_back({"other", "1", "", ""});
  CHECK(c.Post("/api/analyze", none)->status == 400);
  CHECK(c.Get("/")->status == 200);  // still serving
}

TEST_CASE("upload page: path-like names are display names only; methods only from the folder's list", "[serve]") {
  const fs::path dir = fs::temp_directory_path() / "veq_serve_methods";
  fs::create_directories(dir);
  std::ofstream(dir / "m.toml") << "name = \"m\"\n[titrant]\nconcentration_mol_L = 0.1\n[[result]]\nunit = \"mol/L\"\n";
  veq::serve::ServeOptions o;
  o.method_dir = dir;
  Running srv(o);
  auto c = srv.client();
  auto r = c.Post("/api/analyze", files({{"../../etc/passwd", good_run()}}));
  REQUIRE(r);
  REQUIRE(r->status == 200);
  const auto run = nlohmann::json::parse(r->body)["runs"][0];
  CHECK(run["file"] == "passwd");
  CHECK(run["status"] == "ok");
  auto with_method = files({{"x.csv", good_run()}});
  with_method.push_back({"method", "m.toml", "", ""});
  auto m = c.Post("/api/analyze", with_method);
  REQUIRE(m);
  CHECK(m->status == 200);
  // 0.1 mol/L HCl back from the result (stoichiometry).
  CHECK(std::fabs(nlohmann::json::parse(m->body)["runs"][0]["results"][0]["value"].get<double>() - 0.1) < 1e-3);
  with_method.back().content = "../m.toml";
  CHECK(c.Post("/api/analyze", with_method)->status == 400);
  with_method.back().content = "/etc/passwd";
  CHECK(c.Post("/api/analyze", with_method)->status == 400);
}

TEST_CASE("upload page: script tags and quotes in metadata stay text", "[serve]") {
  Running srv({});
  auto c = srv.client();
  auto r = c.Post("/api/analyze", files({{"<img src=x onerror=alert(1)>.csv",
                                          good_run("Operator: <script>alert(\"x\")</script>\n")}}));
  REQUIRE(r);
  REQUIRE(r->status == 200);
  const auto j = nlohmann::json::parse(r->body);
  // JSON carries the text as a string value; the page inserts it with textContent.
  CHECK(j["runs"][0]["file"] == "<img src=x onerror=alert(1)>.csv");
  // The full report escapes them and carries no script at all.
  auto html = c.Get(j["runs"][0]["report"].get<std::string>().c_str());
  REQUIRE(html);
  CHECK(html->status == 200);
  CHECK(html->body.find("<script") == std::string::npos);
  CHECK(html->body.find("&lt;script&gt;") != std::string::npos);
  CHECK(html->get_header_value("Content-Security-Policy").find("default-src 'none'") != std::string::npos);
  auto text = c.Get(j["runs"][0]["downloads"]["text"].get<std::string>().c_str());
  REQUIRE(text);
  CHECK(text->get_header_value("Content-Type").rfind("text/plain", 0) == 0);
  CHECK(text->get_header_value("X-Content-Type-Options") == "nosniff");
}

TEST_CASE("upload page: concurrent uploads are all answered", "[serve]") {
  Running srv({});
  std::vector<std::thread> clients;
  std::atomic<int> ok{0};
  const std::string body = good_run();
  for (int i = 0; i < 16; ++i) {
    clients.emplace_back([&] {
      auto c = srv.client();
      auto r = c.Post("/api/analyze", files({{"c.csv", body}}));
      if (r && r->status == 200 && nlohmann::json::parse(r->body)["runs"][0]["status"] == "ok") ++ok;
    });
  }
  for (auto& t : clients) t.join();
  CHECK(ok == 16);
}

TEST_CASE("serve refuses a non-loopback address without --allow-remote", "[serve][cli]") {
  CHECK(veq::serve::is_loopback("127.0.0.1"));
  CHECK(veq::serve::is_loopback("::1"));
  CHECK_FALSE(veq::serve::is_loopback("0.0.0.0"));
  CHECK_FALSE(veq::serve::is_loopback("192.168.1.20"));
}
