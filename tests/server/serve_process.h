// `taut serve` as a child process for the service tests (test_service,
// test_hostile_clients, test_cli_upload) on a loopback port with a real
// SQLite file. TAUT_BINARY_PATH is set by tests/CMakeLists.txt. Readiness:
// the child prints its bound port once it listens; every wait is bounded.
// `listen` is HOST:PORT ("127.0.0.1:0" picks a free port; a restart passes
// the port the first start got).
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
#include <vector>

namespace taut::testing {

// `taut serve` as a child process; stdout is read for the bound port.
class ServeProcess {
 public:
  ~ServeProcess() { Kill(SIGKILL); }

  // Starts the child and waits (at most 60 s) until it listens. Returns the
  // port, or 0 on failure.
  int Start(const std::string& db, const std::string& log, int workers,
            const std::vector<std::string>& extra_args = {}, const std::string& listen = "127.0.0.1:0") {
    int out[2];
    if (pipe(out) != 0) return 0;
    pid_ = fork();
    if (pid_ == 0) {
      dup2(out[1], STDOUT_FILENO);
      const int err = ::open(log.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
      if (err >= 0) dup2(err, STDERR_FILENO);
      close(out[0]);
      std::vector<std::string> args = {TAUT_BINARY_PATH, "serve", "--db",      db,
                                       "--listen",       listen,  "--workers", std::to_string(workers)};
      args.insert(args.end(), extra_args.begin(), extra_args.end());
      std::vector<char*> argv;
      for (auto& a : args) argv.push_back(a.data());
      argv.push_back(nullptr);
      execv(TAUT_BINARY_PATH, argv.data());
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

  pid_t pid() const { return pid_; }

  // Sends `sig` without reaping (SIGSTOP / SIGCONT).
  void Signal(int sig) {
    if (pid_ > 0) ::kill(pid_, sig);
  }

  // Stops the child (SIGSTOP) and returns once every thread of it has
  // stopped (waitpid with WUNTRACED). kill() only queues the signal: a
  // child still running for a moment after it could commit a write after
  // the caller looked (seen once in test_service: a job counted running was
  // done by the time of the SIGKILL). Returns false if it did not stop.
  bool Stop() {
    if (pid_ <= 0) return false;
    ::kill(pid_, SIGSTOP);
    int status = 0;
    return waitpid(pid_, &status, WUNTRACED) == pid_ && WIFSTOPPED(status);
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

}  // namespace taut::testing
