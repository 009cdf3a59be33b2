#include "server/http_server.h"

#include <arpa/inet.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstring>

#include "server/safe_text.h"

namespace taut::server {

namespace {

using Clock = std::chrono::steady_clock;

// The address of the peer ("127.0.0.1", "::1"), "" if unknown.
std::string PeerAddress(int sock) {
  sockaddr_storage addr{};
  socklen_t len = sizeof addr;
  if (getpeername(sock, reinterpret_cast<sockaddr*>(&addr), &len) != 0) return "";
  char text[INET6_ADDRSTRLEN] = {};
  if (addr.ss_family == AF_INET) {
    inet_ntop(AF_INET, &reinterpret_cast<sockaddr_in*>(&addr)->sin_addr, text, sizeof text);
  } else if (addr.ss_family == AF_INET6) {
    inet_ntop(AF_INET6, &reinterpret_cast<sockaddr_in6*>(&addr)->sin6_addr, text, sizeof text);
  }
  return text;
}

int PeerPort(int sock, bool local) {
  sockaddr_storage addr{};
  socklen_t len = sizeof addr;
  const int rc = local ? getsockname(sock, reinterpret_cast<sockaddr*>(&addr), &len)
                       : getpeername(sock, reinterpret_cast<sockaddr*>(&addr), &len);
  if (rc != 0) return 0;
  if (addr.ss_family == AF_INET) return ntohs(reinterpret_cast<sockaddr_in*>(&addr)->sin_port);
  if (addr.ss_family == AF_INET6) return ntohs(reinterpret_cast<sockaddr_in6*>(&addr)->sin6_port);
  return 0;
}

// A socket stream whose every read and write also ends at the current
// deadline. Reads are buffered (httplib reads the request line and headers
// a byte at a time).
class DeadlineStream final : public httplib::Stream {
 public:
  DeadlineStream(int sock, const ConnectionLimits& limits) : sock_(sock), limits_(limits) {}

  // A new request starts: both deadlines count from now.
  void StartRequest() {
    const auto now = Clock::now();
    header_deadline_ = now + std::chrono::seconds(limits_.header_deadline_s);
    request_deadline_ = now + std::chrono::seconds(limits_.request_deadline_s);
    headers_done_ = false;
    expired_ = false;
  }
  void HeadersDone() { headers_done_ = true; }
  bool expired() const { return expired_; }
  bool has_buffered() const { return begin_ < end_; }

  bool is_readable() const override { return has_buffered() || Wait(POLLIN); }
  bool is_writable() const override { return Wait(POLLOUT); }

  ssize_t read(char* ptr, std::size_t size) override {
    if (!has_buffered()) {
      if (size >= sizeof buffer_) return Recv(ptr, size);
      const ssize_t n = Recv(buffer_, sizeof buffer_);
      if (n <= 0) return n;
      begin_ = 0;
      end_ = static_cast<std::size_t>(n);
    }
    const std::size_t n = std::min(size, end_ - begin_);
    std::memcpy(ptr, buffer_ + begin_, n);
    begin_ += n;
    return static_cast<ssize_t>(n);
  }

  ssize_t write(const char* ptr, std::size_t size) override {
    if (!Wait(POLLOUT)) return -1;
    ssize_t n;
    do {
      n = ::send(sock_, ptr, size, MSG_NOSIGNAL);
    } while (n < 0 && errno == EINTR);
    return n;
  }

  void get_remote_ip_and_port(std::string& ip, int& port) const override {
    ip = PeerAddress(sock_);
    port = PeerPort(sock_, false);
  }
  void get_local_ip_and_port(std::string& ip, int& port) const override {
    ip.clear();
    port = PeerPort(sock_, true);
  }
  socket_t socket() const override { return sock_; }

 private:
  ssize_t Recv(char* ptr, std::size_t size) {
    if (!Wait(POLLIN)) return -1;
    ssize_t n;
    do {
      n = ::recv(sock_, ptr, size, 0);
    } while (n < 0 && errno == EINTR);
    return n;
  }

  // Waits until the socket is ready for `events`, at most the read/write
  // timeout and never past the current deadline (then marks it expired).
  bool Wait(short events) const {
    const auto timeout =
        std::chrono::seconds(events == POLLIN ? limits_.read_timeout_s : limits_.write_timeout_s);
    const auto deadline = std::min(headers_done_ ? request_deadline_ : header_deadline_, request_deadline_);
    const auto now = Clock::now();
    const bool deadline_first = deadline <= now + timeout;
    const auto until = deadline_first ? deadline : now + timeout;
    for (;;) {
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - Clock::now()).count();
      if (left <= 0) {
        if (deadline_first) expired_ = true;
        return false;
      }
      pollfd p{sock_, events, 0};
      const int rc = ::poll(&p, 1, static_cast<int>(std::min<long long>(left, 1000)));
      if (rc > 0) return true;
      if (rc < 0 && errno != EINTR) return false;
    }
  }

  int sock_;
  const ConnectionLimits& limits_;
  Clock::time_point header_deadline_{}, request_deadline_{};
  bool headers_done_ = false;
  mutable bool expired_ = false;
  char buffer_[4096];
  std::size_t begin_ = 0, end_ = 0;
};

// The connection handled on this thread (process_and_close_socket runs a
// connection on one thread from start to end).
struct ConnectionState {
  DeadlineStream* stream = nullptr;
  bool close_after_response = false;
};
thread_local ConnectionState* t_connection = nullptr;

// Waits for the first byte of the next request: true when one arrived
// within `idle_s`; false on timeout, close, or when the server stops.
bool WaitForRequest(int sock, int idle_s, const std::atomic<socket_t>& listening) {
  const auto until = Clock::now() + std::chrono::seconds(idle_s);
  while (listening != INVALID_SOCKET) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - Clock::now()).count();
    if (left <= 0) return false;
    pollfd p{sock, POLLIN, 0};
    const int rc = ::poll(&p, 1, static_cast<int>(std::min<long long>(left, 100)));
    if (rc > 0) return true;
    if (rc < 0 && errno != EINTR) return false;
  }
  return false;
}

// Closing right after a response while the client is still sending its
// body makes the kernel answer the unread bytes with a reset, and the client
// may lose the response (RFC 9112 section 9.6). So the sending side is shut
// first and what the client still sends is read and dropped, at most
// kLinger for the whole of it.
void Linger(int sock) {
  constexpr auto kLinger = std::chrono::seconds(2);
  ::shutdown(sock, SHUT_WR);
  const auto until = Clock::now() + kLinger;
  char sink[16384];
  for (;;) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - Clock::now()).count();
    if (left <= 0) return;
    pollfd p{sock, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(left)) <= 0) return;
    if (::recv(sock, sink, sizeof sink, 0) <= 0) return;
  }
}

void SendRefusal(int sock, const std::string& message) {
  const std::string body = R"({"error":{"code":"unavailable","message":")" + message + "\"}}";
  const std::string text =
      "HTTP/1.1 503 Service Unavailable\r\nContent-Type: application/json\r\n"
      "Connection: close\r\nRetry-After: 5\r\nContent-Length: " +
      std::to_string(body.size()) + "\r\n\r\n" + body;
  pollfd p{sock, POLLOUT, 0};
  if (::poll(&p, 1, 1000) > 0) (void)::send(sock, text.data(), text.size(), MSG_NOSIGNAL);
}

}  // namespace

GuardedServer::GuardedServer(ConnectionLimits limits, Metrics* metrics,
                             std::function<void(const std::string&)> log)
    : limits_(limits), metrics_(metrics), log_(std::move(log)) {}

void GuardedServer::CloseAfterResponse(httplib::Response& res) {
  res.set_header("Connection", "close");
  if (t_connection) t_connection->close_after_response = true;
}

void GuardedServer::WidenBacklog(int backlog) { ::listen(svr_sock_, backlog); }

void GuardedServer::KeepAlive() {
  if (t_connection) t_connection->close_after_response = false;
}

void GuardedServer::HeadersDone() {
  if (t_connection && t_connection->stream) t_connection->stream->HeadersDone();
}

bool GuardedServer::process_and_close_socket(socket_t sock) {
  const std::string client = PeerAddress(sock);
  bool admitted = true;
  {
    std::lock_guard<std::mutex> lock(mu_);
    int& open = open_by_client_[client];
    if (limits_.max_per_client > 0 && open >= limits_.max_per_client) {
      admitted = false;
    } else {
      ++open;
    }
    if (!admitted && open == 0) open_by_client_.erase(client);
  }
  if (!admitted) {
    metrics_->RecordConnectionEvent("refused_per_client_cap");
    if (log_) {
      log_("level=warn remote=" + EscapeForLog(client) + " connection refused: more than " +
           std::to_string(limits_.max_per_client) + " open connections from this address");
    }
    SendRefusal(sock, "too many open connections from this address; retry later");
    ::shutdown(sock, SHUT_WR);
  } else {
    DeadlineStream stream(sock, limits_);
    ConnectionState state{&stream, false};
    t_connection = &state;
    std::size_t count = std::max<std::size_t>(1, limits_.keep_alive_max_requests);
    // The first request waits as long as a header may take; later ones
    // only the short keep-alive idle time.
    int idle_s = limits_.header_deadline_s;
    while (count > 0 && (stream.has_buffered() || WaitForRequest(sock, idle_s, svr_sock_))) {
      stream.StartRequest();
      state.close_after_response = false;
      bool connection_closed = false;
      const bool ok = process_request(stream, /*close_connection=*/count == 1, connection_closed, nullptr);
      if (stream.expired()) {
        metrics_->RecordConnectionEvent("deadline_exceeded");
        if (log_) {
          log_("level=warn remote=" + EscapeForLog(client) +
               " connection closed: the request did not arrive within its deadline");
        }
        break;
      }
      if (!ok || connection_closed || state.close_after_response) break;
      --count;
      idle_s = limits_.keep_alive_idle_s;
    }
    t_connection = nullptr;
    if (state.close_after_response) Linger(sock);
    std::lock_guard<std::mutex> lock(mu_);
    if (--open_by_client_[client] <= 0) open_by_client_.erase(client);
  }
  ::shutdown(sock, SHUT_RDWR);
  ::close(sock);
  return true;
}

}  // namespace taut::server
