// Test helper: the real `taut serve` executable (TAUT_BINARY_PATH) as a
// child process on a loopback port with a real SQLite file. Readiness: the
// child prints its bound port once it listens (cpp-httplib test/test.cc
// style: ephemeral port, wait until ready, stop and reap); every wait is
// bounded.
#pragma once

#include <fcntl.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <thread>

namespace taut::server {

// `taut serve` as a child process; stdout is read for the bound port.
class ServeProcess {
 public:
  ~ServeProcess() { Kill(SIGKILL); }

  // Starts the child and waits (at most 60 s) until it listens. Returns the
  // port, or 0 on failure.
  // `listen` is HOST:PORT ("127.0.0.1:0" picks a free port; a restart
  // passes the port the first start got).
  int Start(const std::string& db, const std::string& log, int workers,
            const std::string& listen = "127.0.0.1:0") {
    int out[2];
    if (pipe(out) != 0) return 0;
    pid_ = fork();
    if (pid_ == 0) {
      dup2(out[1], STDOUT_FILENO);
      const int err = ::open(log.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
      if (err >= 0) dup2(err, STDERR_FILENO);
      close(out[0]);
      const std::string w = std::to_string(workers);
      execl(TAUT_BINARY_PATH, TAUT_BINARY_PATH, "serve", "--db", db.c_str(), "--listen", listen.c_str(),
            "--workers", w.c_str(), static_cast<char*>(nullptr));
      _exit(127);
    }
    close(out[1]);
    std::FILE* f = fdopen(out[0], "r");
    char line[256];
    int port = 0;
    // "taut serve: listening on http://127.0.0.1:PORT" (cli_serve.cpp);
    // fgets blocks until the child writes it or exits (EOF).
    while (f && std::fgets(line, sizeof line, f)) {
      const char* p = std::strstr(line, "127.0.0.1:");
      if (p) {
        port = std::atoi(p + std::strlen("127.0.0.1:"));
        break;
      }
    }
    // Keep draining the child's stdout so it never blocks on a full pipe.
    reader_ = std::thread([f] {
      char buf[256];
      while (f && std::fgets(buf, sizeof buf, f)) {
      }
      if (f) std::fclose(f);
    });
    return port;
  }

  // Sends `sig` without reaping (SIGSTOP / SIGCONT).
  void Signal(int sig) {
    if (pid_ > 0) ::kill(pid_, sig);
  }

  // Sends `sig` and reaps the child; returns its wait status.
  int Kill(int sig) {
    int status = 0;
    if (pid_ > 0) {
      ::kill(pid_, sig);
      waitpid(pid_, &status, 0);
      pid_ = -1;
    }
    if (reader_.joinable()) reader_.join();
    return status;
  }

 private:
  pid_t pid_ = -1;
  std::thread reader_;
};

}  // namespace taut::server
