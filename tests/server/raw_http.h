// Plain TCP clients for the tests that play a hostile or careless HTTP
// client (what httplib::Client would never send: partial headers, slow
// bytes, chunked bodies without end, a chosen loopback source address).
#pragma once

#include <arpa/inet.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <chrono>
#include <string>

namespace taut::testing {

// A TCP connection to 127.0.0.1:port from `source` (any 127.0.0.0/8
// address: Linux routes the whole block to the loopback device, so tests
// can play several clients). -1 on failure.
inline int ConnectFrom(const char* source, int port) {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  if (fd < 0) return -1;
  sockaddr_in src{};
  src.sin_family = AF_INET;
  inet_pton(AF_INET, source, &src.sin_addr);
  sockaddr_in dst{};
  dst.sin_family = AF_INET;
  dst.sin_port = htons(static_cast<std::uint16_t>(port));
  inet_pton(AF_INET, "127.0.0.1", &dst.sin_addr);
  if (::bind(fd, reinterpret_cast<sockaddr*>(&src), sizeof src) != 0 ||
      ::connect(fd, reinterpret_cast<sockaddr*>(&dst), sizeof dst) != 0) {
    ::close(fd);
    return -1;
  }
  return fd;
}

// Sends all of `data` (false if the peer closed or the send failed).
inline bool SendAll(int fd, const std::string& data) {
  std::size_t sent = 0;
  while (sent < data.size()) {
    const ssize_t n = ::send(fd, data.data() + sent, data.size() - sent, MSG_NOSIGNAL);
    if (n <= 0) return false;
    sent += static_cast<std::size_t>(n);
  }
  return true;
}

// Reads until the peer closes or `timeout` passes; returns what arrived.
inline std::string ReadUntilClosed(int fd, std::chrono::milliseconds timeout, bool* closed = nullptr) {
  std::string out;
  const auto until = std::chrono::steady_clock::now() + timeout;
  if (closed) *closed = false;
  char buf[4096];
  for (;;) {
    const auto left =
        std::chrono::duration_cast<std::chrono::milliseconds>(until - std::chrono::steady_clock::now())
            .count();
    if (left <= 0) return out;
    pollfd p{fd, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(left)) <= 0) return out;
    const ssize_t n = ::recv(fd, buf, sizeof buf, 0);
    if (n <= 0) {
      if (closed) *closed = true;
      return out;
    }
    out.append(buf, static_cast<std::size_t>(n));
  }
}

// The status code of the first response in `text`, 0 if none.
inline int StatusOf(const std::string& text) {
  if (text.rfind("HTTP/1.1 ", 0) != 0 || text.size() < 12) return 0;
  return std::atoi(text.substr(9, 3).c_str());
}

}  // namespace taut::testing
