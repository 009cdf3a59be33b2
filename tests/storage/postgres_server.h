// A throw-away PostgreSQL server for the tests: initdb in a temporary
// folder, started on a free loopback port, stopped and removed at the end.
// As root (CI) the server runs as the `postgres` system user (initdb refuses
// root); otherwise as the current user. The binaries come from Debian's
// postgresql package (deploy/install-deps.sh); a missing package is a test
// failure with that reason, never a skip.
#pragma once

#include <arpa/inet.h>
#include <netinet/in.h>
#include <pwd.h>
#include <sys/socket.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace taut::testing {

class PostgresServer {
 public:
  PostgresServer() = default;
  PostgresServer(const PostgresServer&) = delete;
  PostgresServer& operator=(const PostgresServer&) = delete;
  ~PostgresServer() { Stop(); }

  // Starts the server; on failure returns false and says why in *error.
  bool Start(std::string* error) {
    const std::string bin = BinDir();
    if (bin.empty()) {
      *error = "no /usr/lib/postgresql/*/bin/initdb: install Debian's postgresql (deploy/install-deps.sh)";
      return false;
    }
    char tmpl[] = "/tmp/taut-pg-XXXXXX";
    if (mkdtemp(tmpl) == nullptr) {
      *error = "mkdtemp failed";
      return false;
    }
    dir_ = tmpl;
    std::string as_user;
    if (geteuid() == 0) {
      const passwd* pw = getpwnam("postgres");
      if (pw == nullptr) {
        *error = "running as root and there is no postgres user to run the server as";
        return false;
      }
      if (chown(dir_.c_str(), pw->pw_uid, pw->pw_gid) != 0) {
        *error = "cannot hand " + dir_ + " to the postgres user";
        return false;
      }
      as_user = "runuser -u postgres -- ";
    }
    const std::string data = dir_ + "/data";
    if (!Run(as_user + bin + "/initdb -D " + data + " -A trust -U taut -E UTF8 --locale=C --no-sync > " +
             dir_ + "/initdb.log 2>&1")) {
      *error = "initdb failed: " + Slurp(dir_ + "/initdb.log");
      return false;
    }
    // A free port: bind port 0 on loopback, read it, release it. Another
    // process could take it in between, so a failed start tries again.
    for (int attempt = 0; attempt < 3; ++attempt) {
      port_ = FreeLoopbackPort();
      const std::string options = "-c listen_addresses=127.0.0.1 -p " + std::to_string(port_) + " -k " +
                                  dir_ + " -c fsync=off -c synchronous_commit=off -c max_connections=200";
      if (Run(as_user + bin + "/pg_ctl -D " + data + " -l " + dir_ + "/server.log -w -t 60 -o \"" + options +
              "\" start > /dev/null 2>&1")) {
        started_ = true;
        as_user_ = as_user;
        bin_ = bin;
        return true;
      }
    }
    *error = "pg_ctl start failed: " + Slurp(dir_ + "/server.log");
    return false;
  }

  // Stops the server but keeps its data (an outage); Resume() starts it
  // again on the same port. Fast shutdown (sessions terminated, then a
  // checkpoint): this server runs with synchronous_commit = off, so an
  // immediate one could lose the last commits, which a production server
  // (synchronous_commit = on) would not.
  bool Pause() {
    if (!started_) return false;
    started_ = !Run(as_user_ + bin_ + "/pg_ctl -D " + dir_ + "/data -m fast -w stop > /dev/null 2>&1");
    return !started_;
  }
  bool Resume() {
    const std::string options = "-c listen_addresses=127.0.0.1 -p " + std::to_string(port_) + " -k " + dir_ +
                                " -c fsync=off -c synchronous_commit=off -c max_connections=200";
    started_ = Run(as_user_ + bin_ + "/pg_ctl -D " + dir_ + "/data -l " + dir_ +
                   "/server.log -w -t 60 -o \"" + options + "\" start > /dev/null 2>&1");
    return started_;
  }

  void Stop() {
    if (started_) Run(as_user_ + bin_ + "/pg_ctl -D " + dir_ + "/data -m immediate -w stop > /dev/null 2>&1");
    started_ = false;
    if (!dir_.empty()) {
      std::error_code ec;
      std::filesystem::remove_all(dir_, ec);
      dir_.clear();
    }
  }

  int port() const { return port_; }

  // A libpq URI for database `db` on this server (user taut, trust login).
  std::string Uri(const std::string& db) const {
    return "postgresql://taut@127.0.0.1:" + std::to_string(port_) + "/" + db;
  }

 private:
  static bool Run(const std::string& command) { return std::system(command.c_str()) == 0; }

  static std::string Slurp(const std::string& path) {
    std::ifstream in(path);
    std::stringstream s;
    s << in.rdbuf();
    return s.str();
  }

  // The newest installed major version's bin folder.
  static std::string BinDir() {
    std::string best;
    std::error_code ec;
    for (const auto& e : std::filesystem::directory_iterator("/usr/lib/postgresql", ec)) {
      const std::string bin = e.path().string() + "/bin";
      if (std::filesystem::exists(bin + "/initdb") && bin > best) best = bin;
    }
    return best;
  }

  static int FreeLoopbackPort() {
    const int fd = socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    a.sin_port = 0;
    socklen_t len = sizeof a;
    int port = 0;
    if (bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0 &&
        getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len) == 0)
      port = ntohs(a.sin_port);
    close(fd);
    return port;
  }

  std::string dir_, bin_, as_user_;
  int port_ = 0;
  bool started_ = false;
};

}  // namespace taut::testing
