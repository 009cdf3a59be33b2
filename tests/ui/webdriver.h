// A small W3C WebDriver client for the dashboard's browser test and bench:
// starts Debian's chromedriver on a free loopback port, opens one headless
// Chromium session and drives it over plain HTTP + JSON (cpp-httplib,
// nlohmann_json). No npm, no network beyond loopback.
//
// Chromium runs as root in CI containers, hence --no-sandbox; the
// background-networking flags keep it from reaching for the (closed)
// internet, and a fresh --user-data-dir keeps runs independent.
//
// Element references are the W3C "element-6066-..." ids as strings.
// Every call returns false / an empty value on failure and keeps the
// message in last_error() (tests print it).
#pragma once

#include <fcntl.h>
#include <netinet/in.h>
#include <openssl/evp.h>
#include <signal.h>
#include <spawn.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <thread>
#include <vector>

// After any Eigen include of the including file: <resolv.h> defines _res.
#include <httplib.h>

extern char** environ;

namespace taut::testing {

inline constexpr const char* kChromium = "/usr/bin/chromium";
inline constexpr const char* kChromedriver = "/usr/bin/chromedriver";
// chromedriver answers /status within a second on this machine; 20 s
// covers a loaded CI runner.
inline constexpr double kDriverStartTimeout_s = 20.0;

inline bool HaveChromium() { return ::access(kChromium, X_OK) == 0 && ::access(kChromedriver, X_OK) == 0; }

class WebDriver {
 public:
  // log_path: chromedriver's stdout/stderr (kept as a test artifact).
  // window: the browser window size in CSS pixels.
  static std::unique_ptr<WebDriver> Start(const std::string& log_path, int width, int height,
                                          std::string* error) {
    auto d = std::unique_ptr<WebDriver>(new WebDriver());
    if (!d->Launch(log_path, width, height)) {
      *error = d->last_error_;
      return nullptr;
    }
    return d;
  }

  ~WebDriver() {
    if (!session_.empty() && client_) client_->Delete("/session/" + session_);
    if (pid_ > 0) {
      ::kill(pid_, SIGTERM);
      int status = 0;
      ::waitpid(pid_, &status, 0);
    }
    if (!profile_.empty()) {
      std::error_code ec;
      std::filesystem::remove_all(profile_, ec);
    }
  }

  const std::string& last_error() const { return last_error_; }

  bool Navigate(const std::string& url) { return Command("POST", "/url", {{"url", url}}).has_value(); }

  // Runs `script` (a function body: `return ...;`) with `args`; the value.
  nlohmann::json Execute(const std::string& script, const nlohmann::json& args = nlohmann::json::array()) {
    auto v = Command("POST", "/execute/sync", {{"script", script}, {"args", args}});
    return v ? *v : nlohmann::json();
  }

  // Polls the boolean expression `condition` every 25 ms until it holds.
  bool WaitFor(const std::string& condition, double timeout_s) {
    const auto end = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_s);
    for (;;) {
      const nlohmann::json v = Execute("return !!(" + condition + ");");
      if (v.is_boolean() && v.get<bool>()) return true;
      if (std::chrono::steady_clock::now() > end) {
        last_error_ = "timed out after " + std::to_string(timeout_s) + " s waiting for " + condition;
        return false;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(25));
    }
  }

  std::string Find(const std::string& css) {
    auto v = Command("POST", "/element", {{"using", "css selector"}, {"value", css}});
    if (!v || !v->is_object() || v->empty()) return "";
    return v->begin().value().get<std::string>();
  }
  bool Click(const std::string& element) {
    return !element.empty() && Command("POST", "/element/" + element + "/click", nlohmann::json::object());
  }
  // Keys as WebDriver text; "\uE010" is End, "\uE007" Enter (W3C keys table).
  bool Type(const std::string& element, const std::string& text) {
    return !element.empty() && Command("POST", "/element/" + element + "/value", {{"text", text}});
  }

  // A PNG of the whole page (not only the viewport), through Chromium's
  // DevTools command that chromedriver forwards.
  bool Screenshot(const std::string& path) {
    const nlohmann::json dims =
        Execute("return [document.documentElement.scrollWidth, document.documentElement.scrollHeight];");
    if (!dims.is_array() || dims.size() != 2) return false;
    const nlohmann::json clip = {{"x", 0}, {"y", 0}, {"width", dims[0]}, {"height", dims[1]}, {"scale", 1}};
    const nlohmann::json params = {{"captureBeyondViewport", true}, {"clip", clip}};
    auto v = Command("POST", "/goog/cdp/execute", {{"cmd", "Page.captureScreenshot"}, {"params", params}});
    if (!v || !v->contains("data")) return false;
    const std::string b64 = (*v)["data"].get<std::string>();
    std::string png(b64.size() / 4 * 3 + 3, '\0');
    const int n =
        EVP_DecodeBlock(reinterpret_cast<unsigned char*>(png.data()),
                        reinterpret_cast<const unsigned char*>(b64.data()), static_cast<int>(b64.size()));
    if (n < 0) return false;
    std::size_t pad = 0;
    while (pad < 2 && pad < b64.size() && b64[b64.size() - 1 - pad] == '=') ++pad;
    png.resize(static_cast<std::size_t>(n) - pad);
    std::filesystem::create_directories(std::filesystem::path(path).parent_path());
    std::ofstream(path, std::ios::binary) << png;
    return true;
  }

 private:
  WebDriver() = default;

  static int FreePort() {
    const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    a.sin_port = 0;
    socklen_t len = sizeof a;
    int port = 0;
    if (::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0 &&
        ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len) == 0) {
      port = ntohs(a.sin_port);
    }
    ::close(fd);
    return port;
  }

  bool Launch(const std::string& log_path, int width, int height) {
    // The port is free when chosen and taken by chromedriver a moment later;
    // another process could take it in between, so a failed start retries.
    for (int attempt = 0; attempt < 3; ++attempt) {
      port_ = FreePort();
      if (port_ <= 0) continue;
      posix_spawn_file_actions_t actions;
      posix_spawn_file_actions_init(&actions);
      posix_spawn_file_actions_addopen(&actions, 1, log_path.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
      posix_spawn_file_actions_adddup2(&actions, 1, 2);
      const std::string port_arg = "--port=" + std::to_string(port_);
      std::vector<char*> argv = {const_cast<char*>(kChromedriver), const_cast<char*>(port_arg.c_str()),
                                 nullptr};
      const int rc = posix_spawn(&pid_, kChromedriver, &actions, nullptr, argv.data(), environ);
      posix_spawn_file_actions_destroy(&actions);
      if (rc != 0) {
        last_error_ = "cannot start " + std::string(kChromedriver);
        pid_ = -1;
        return false;
      }
      client_ = std::make_unique<httplib::Client>("127.0.0.1", port_);
      client_->set_connection_timeout(1, 0);
      client_->set_read_timeout(60, 0);
      if (WaitReady()) break;
      ::kill(pid_, SIGTERM);
      ::waitpid(pid_, nullptr, 0);
      pid_ = -1;
    }
    if (pid_ <= 0) {
      last_error_ = "chromedriver did not become ready (log: " + log_path + ")";
      return false;
    }
    char tmpl[] = "/tmp/taut-chromium-XXXXXX";
    if (::mkdtemp(tmpl) == nullptr) {
      last_error_ = "mkdtemp failed";
      return false;
    }
    profile_ = tmpl;
    const nlohmann::json args = {"--headless",
                                 "--no-sandbox",
                                 "--disable-gpu",
                                 "--disable-quic",
                                 "--no-first-run",
                                 "--disable-background-networking",
                                 "--disable-component-update",
                                 "--disable-sync",
                                 "--disable-dev-shm-usage",
                                 "--window-size=" + std::to_string(width) + "," + std::to_string(height),
                                 "--user-data-dir=" + profile_};
    const nlohmann::json caps = {
        {"capabilities",
         {{"alwaysMatch",
           {{"browserName", "chrome"}, {"goog:chromeOptions", {{"binary", kChromium}, {"args", args}}}}}}}};
    auto res = client_->Post("/session", caps.dump(), "application/json");
    if (!res) {
      last_error_ = "new session: " + httplib::to_string(res.error());
      return false;
    }
    const nlohmann::json j = nlohmann::json::parse(res->body, nullptr, false);
    if (j.is_discarded() || !j.contains("value") || !j["value"].contains("sessionId")) {
      last_error_ = "new session refused: " + res->body;
      return false;
    }
    session_ = j["value"]["sessionId"].get<std::string>();
    return true;
  }

  bool WaitReady() {
    const auto end = std::chrono::steady_clock::now() + std::chrono::duration<double>(kDriverStartTimeout_s);
    while (std::chrono::steady_clock::now() < end) {
      if (auto r = client_->Get("/status"); r && r->status == 200) {
        const nlohmann::json j = nlohmann::json::parse(r->body, nullptr, false);
        if (!j.is_discarded() && j["value"].value("ready", false)) return true;
      }
      int status = 0;
      if (::waitpid(pid_, &status, WNOHANG) == pid_) return false;  // exited (port taken?)
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    return false;
  }

  // A command of the session; its "value", or nullopt with last_error_ set.
  std::optional<nlohmann::json> Command(const char* method, const std::string& path,
                                        const nlohmann::json& body) {
    const std::string url = "/session/" + session_ + path;
    httplib::Result r = std::string(method) == "GET" ? client_->Get(url)
                                                     : client_->Post(url, body.dump(), "application/json");
    if (!r) {
      last_error_ = std::string(method) + " " + path + ": " + httplib::to_string(r.error());
      return std::nullopt;
    }
    const nlohmann::json j = nlohmann::json::parse(r->body, nullptr, false);
    if (r->status != 200 || j.is_discarded()) {
      last_error_ = std::string(method) + " " + path + ": HTTP " + std::to_string(r->status) + " " + r->body;
      return std::nullopt;
    }
    return j.contains("value") ? j["value"] : nlohmann::json();
  }

  pid_t pid_ = -1;
  int port_ = 0;
  std::unique_ptr<httplib::Client> client_;
  std::string session_;
  std::string profile_;
  std::string last_error_;
};

}  // namespace taut::testing
