// Issue 13 item 2: slow and idle clients must not starve the service. A real
// `taut serve` (and the same behind nginx with deploy/nginx/taut-proxy.conf)
// is given 200 hostile connections on loopback: 100 "slowloris" clients
// (a header byte now and then, never finishing) from 127.0.0.2 and 100 idle
// keep-alive connections from 127.0.0.3. Health and metrics from 127.0.0.1
// must answer within 1 s throughout (the issue's requirement).
//
// Loopback only; every loop is bounded by a fixed time (about 3 s of probes
// per case). nginx must be installed (deploy/install-deps.sh): a missing
// nginx fails the test, it is not skipped.
#include <gtest/gtest.h>
#include <sys/stat.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "raw_http.h"
#include "serve_process.h"
#include "server/auth.h"
#include "server/iso_time.h"
#include "storage/migrations.h"
#include "storage/repository.h"

// After Eigen (none here, but keep the project's order): <resolv.h> defines _res.
#include <httplib.h>

namespace taut::server {
namespace {

using Clock = std::chrono::steady_clock;
namespace fs = std::filesystem;

constexpr int kSlowClients = 100;  // per kind: slowloris and idle
constexpr auto kProbeTime = std::chrono::seconds(3);

class HostileClientsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::temp_directory_path() / ("taut-hostile-" + std::to_string(::getpid()) + "-" +
                                        ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::remove_all(dir_);
    fs::create_directories(dir_);
    port_ = serve_.Start((dir_ / "taut.db").string(), (dir_ / "serve.log").string(), 1, {"--quiet"});
    ASSERT_GT(port_, 0);
  }
  void TearDown() override {
    for (int fd : hostile_) ::close(fd);
    if (nginx_pid_ > 0) {
      ::kill(nginx_pid_, SIGQUIT);
      int status = 0;
      waitpid(nginx_pid_, &status, 0);
    }
    serve_.Kill(SIGTERM);
    fs::remove_all(dir_);
  }

  // Opens the hostile connections to `port`: slowloris from 127.0.0.2
  // (request line and half a header), idle ones from 127.0.0.3.
  void OpenHostile(int port) {
    for (int i = 0; i < kSlowClients; ++i) {
      const int slow = taut::testing::ConnectFrom("127.0.0.2", port);
      if (slow >= 0) {
        taut::testing::SendAll(slow, "GET /v1/health HTTP/1.1\r\nHost: t\r\nX-Slow: ");
        hostile_.push_back(slow);
      }
      const int idle = taut::testing::ConnectFrom("127.0.0.3", port);
      if (idle >= 0) hostile_.push_back(idle);
    }
    ASSERT_EQ(hostile_.size(), 2u * kSlowClients);
  }

  // For kProbeTime: every 100 ms, a byte to every slowloris connection,
  // then GET /v1/health and GET /metrics through `port`. Returns the
  // slowest answer in seconds; every answer must be 200.
  double Probe(int port) {
    double slowest = 0;
    int probes = 0;
    const auto end = Clock::now() + kProbeTime;
    while (Clock::now() < end) {
      for (std::size_t i = 0; i < hostile_.size(); i += 2) (void)taut::testing::SendAll(hostile_[i], "x");
      for (const char* path : {"/v1/health", "/metrics"}) {
        httplib::Client c("127.0.0.1", port);
        c.set_connection_timeout(1, 0);
        c.set_read_timeout(1, 0);
        const auto t0 = Clock::now();
        auto r = c.Get(path);
        const double s = std::chrono::duration<double>(Clock::now() - t0).count();
        slowest = std::max(slowest, s);
        EXPECT_TRUE(r) << path << ": " << httplib::to_string(r.error()) << " after " << s << " s";
        if (r) {
          EXPECT_EQ(r->status, 200) << path;
        }
        ++probes;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    EXPECT_GT(probes, 10);
    return slowest;
  }

  fs::path dir_;
  taut::testing::ServeProcess serve_;
  int port_ = 0;
  std::vector<int> hostile_;
  pid_t nginx_pid_ = -1;
};

TEST_F(HostileClientsTest, HealthAndMetricsAnswerWithin1sWhile200SlowClientsAreConnected) {
  OpenHostile(port_);
  const double slowest = Probe(port_);
  EXPECT_LT(slowest, 1.0) << "the issue's bound: 1 s";
  std::cout << "slowest health/metrics answer, direct: " << slowest << " s\n";
  // 32 connections per address are admitted (the default cap), the rest
  // were answered 503 and counted (all of them: no admitted one reached
  // its 10 s header deadline within this test).
  httplib::Client c("127.0.0.1", port_);
  const std::string metrics = c.Get("/metrics")->body;
  const auto at = metrics.find("taut_http_connection_events_total{event=\"refused_per_client_cap\"} ");
  ASSERT_NE(at, std::string::npos) << metrics;
  const int refused =
      std::atoi(metrics.c_str() + at +
                std::strlen("taut_http_connection_events_total{event=\"refused_per_client_cap\"} "));
  EXPECT_EQ(refused, 2 * (kSlowClients - 32));
}

// A free TCP port on 127.0.0.1 (bound and released; nginx binds it next).
int FreePort() {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  inet_pton(AF_INET, "127.0.0.1", &a.sin_addr);
  ::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a);
  socklen_t len = sizeof a;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
  ::close(fd);
  return ntohs(a.sin_port);
}

TEST_F(HostileClientsTest, BehindNginxTheSameSlowClientsDoNotReachTaut) {
  const char* nginx = "/usr/sbin/nginx";
  ASSERT_TRUE(fs::exists(nginx)) << "nginx is missing: deploy/install-deps.sh installs it";
  const int nginx_port = FreePort();
  const fs::path prefix = dir_ / "nginx";
  fs::create_directories(prefix / "logs");
  // nginx's workers write request bodies to the temporary paths; as root
  // they would run as "nobody" and could not, so they stay root here.
  std::ofstream conf(prefix / "nginx.conf");
  conf << (::geteuid() == 0 ? "user root;\n" : "") << "worker_processes 1;\n"
       << "pid " << (prefix / "nginx.pid").string() << ";\n"
       << "error_log " << (prefix / "logs/error.log").string() << " warn;\n"
       << "events { worker_connections 1024; }\n"
       << "http {\n  access_log off;\n"
       << "  client_body_temp_path " << (prefix / "body").string() << ";\n"
       << "  proxy_temp_path " << (prefix / "proxy").string() << ";\n"
       << "  fastcgi_temp_path " << (prefix / "fastcgi").string() << ";\n"
       << "  uwsgi_temp_path " << (prefix / "uwsgi").string() << ";\n"
       << "  scgi_temp_path " << (prefix / "scgi").string() << ";\n"
       << "  upstream taut_upstream { server 127.0.0.1:" << port_ << "; keepalive 32; }\n"
       << "  server {\n    listen 127.0.0.1:" << nginx_port << ";\n"
       << "    include " << TAUT_SOURCE_DIR << "/deploy/nginx/taut-proxy.conf;\n  }\n}\n";
  conf.close();
  nginx_pid_ = fork();
  if (nginx_pid_ == 0) {
    const std::string p = prefix.string(), c = (prefix / "nginx.conf").string();
    execl(nginx, nginx, "-p", p.c_str(), "-c", c.c_str(), "-g", "daemon off;", static_cast<char*>(nullptr));
    _exit(127);
  }
  // Wait (at most 10 s) until nginx answers.
  bool up = false;
  for (int i = 0; i < 100 && !up; ++i) {
    httplib::Client c("127.0.0.1", nginx_port);
    c.set_connection_timeout(0, 100000);
    auto r = c.Get("/v1/health");
    up = r && r->status == 200;
    if (!up) std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  ASSERT_TRUE(up) << "nginx did not start; its log: " << std::ifstream(prefix / "logs/error.log").rdbuf();
  OpenHostile(nginx_port);
  const double slowest = Probe(nginx_port);
  EXPECT_LT(slowest, 1.0) << "the issue's bound: 1 s";
  std::cout << "slowest health/metrics answer, behind nginx: " << slowest << " s\n";
  // nginx held every hostile connection itself: taut refused none and cut
  // none (it never saw them).
  httplib::Client c("127.0.0.1", port_);
  const std::string metrics = c.Get("/metrics")->body;
  EXPECT_EQ(metrics.find("refused_per_client_cap"), std::string::npos) << metrics;
}

// Peak resident memory of `pid` (VmHWM of /proc/PID/status), bytes.
std::int64_t PeakRss(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmHWM:", 0) == 0) return std::atoll(line.c_str() + 6) * 1024;
  }
  return -1;
}

// Issue 13 item 4: a JSON record upload peaked at 30 times its body (a DOM
// node per sample). Streamed now: the service's peak memory grows by at
// most 3 times the body (the issue's bound) for a 30 MB upload.
TEST_F(HostileClientsTest, JsonUploadPeakMemoryIsAtMostThreeTimesItsBody) {
  serve_.Kill(SIGTERM);
  const std::string db = (dir_ / "mem.db").string();
  std::string admin;
  {
    storage::Database d;
    ASSERT_TRUE(storage::OpenAndMigrate(d, db).ok());
    storage::Repository repo(d);
    storage::Id org = 0;
    ASSERT_TRUE(repo.CreateOrganisation("org", NowUnixMs(), &org).ok());
    ASSERT_TRUE(IssueToken(repo, org, storage::Role::kAdmin, "admin", NowUnixMs(), &admin).ok());
  }
  port_ = serve_.Start(db, (dir_ / "mem.log").string(), 1, {"--quiet"});
  ASSERT_GT(port_, 0);
  httplib::Client c("127.0.0.1", port_);
  c.set_default_headers({{"Authorization", "Bearer " + admin}});
  c.set_read_timeout(120, 0);
  auto s = c.Post("/v1/structures", R"({"name": "Hall"})", "application/json");
  ASSERT_EQ(s->status, 201) << s->body;
  std::ifstream member_file(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json");
  const std::string member((std::istreambuf_iterator<char>(member_file)), std::istreambuf_iterator<char>());
  auto m =
      c.Post("/v1/structures/" + std::to_string(nlohmann::json::parse(s->body)["id"].get<int>()) + "/members",
             member, "application/json");
  ASSERT_EQ(m->status, 201) << m->body;
  const std::string path =
      "/v1/members/" + std::to_string(nlohmann::json::parse(m->body)["id"].get<int>()) + "/records";
  // 600,000 rows of 3 channels, about 30 MB of text.
  std::string body =
      R"({"recorded_at": "2026-11-21T08:00:00Z", "sample_rate_hz": 256, "channels": ["v1", "v2", "v3"], "samples": [)";
  char row[96];
  for (int i = 0; i < 600000; ++i) {
    std::snprintf(row, sizeof row, "%s[%.12f,%.12f,%.12f]", i ? "," : "", std::sin(0.01 * i),
                  std::cos(0.013 * i), std::sin(0.017 * i + 1));
    body += row;
  }
  body += "]}";
  const std::int64_t before = PeakRss(serve_.pid());
  auto r = c.Post(path, body, "application/json");
  ASSERT_TRUE(r);
  EXPECT_EQ(r->status, 202) << r->body.substr(0, 300);
  const std::int64_t after = PeakRss(serve_.pid());
  const double ratio = static_cast<double>(after - before) / static_cast<double>(body.size());
  std::cout << "JSON upload of " << body.size() / 1e6 << " MB: peak RSS " << before / 1e6 << " -> "
            << after / 1e6 << " MB, growth " << ratio << " x the body\n";
  EXPECT_LE(ratio, 3.0);
}

}  // namespace
}  // namespace taut::server
