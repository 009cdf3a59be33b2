// Limits and defaults of the HTTP service, in one place (STYLE.md item 15).
// Every value carries its unit in its name.
#pragma once

#include <cstddef>
#include <cstdint>

namespace taut::server {

// Request body limit (`taut serve --max-body`, MiB): a 300 s, 3-channel,
// 512 Hz CSV is about 15 MiB, so 64 MiB leaves room for long records.
inline constexpr std::size_t kDefaultMaxBody_mib = 64;
// Connection policy of the HTTP server (http_server.h). A client that holds
// a connection without sending at a reasonable pace is cut off:
// - the request line and headers must arrive within the header deadline
//   (`--header-deadline`, default kDefaultHeaderDeadline_s);
// - the whole request (body, handling, response) within the request deadline
//   (`taut serve --request-deadline`, default kDefaultRequestDeadline_s: a
//   64 MiB upload at 8 Mbit/s takes about 70 s);
// - each read waits at most kReadTimeout_s, each write kWriteTimeout_s;
// - an idle keep-alive connection is closed after kKeepAliveIdle_s, and
//   after kKeepAliveMaxRequests requests;
// - one address may hold at most --max-connections-per-client connections
//   (default kDefaultMaxConnectionsPerClient; 0 = no cap, for a reverse
//   proxy in front, deploy/nginx/taut.conf); more are answered 503.
inline constexpr int kDefaultHeaderDeadline_s = 10;
inline constexpr int kDefaultRequestDeadline_s = 120;
inline constexpr int kReadTimeout_s = 10;
inline constexpr int kWriteTimeout_s = 30;
inline constexpr int kKeepAliveIdle_s = 2;
inline constexpr std::size_t kKeepAliveMaxRequests = 100;
inline constexpr int kDefaultMaxConnectionsPerClient = 32;
// Threads answering HTTP requests (cpp-httplib's task queue; one per open
// connection). Idle threads cost a stack's address space, not memory; 128
// leaves room for 4 clients at the per-client cap and everyone else.
inline constexpr int kHttpThreads = 128;
// Connections the kernel queues before they are accepted.
inline constexpr int kListenBacklog = 1024;
// Job workers of `taut serve` unless --workers says otherwise.
inline constexpr int kDefaultWorkers = 2;
// Force history without `from`: the last 30 days before `to`.
inline constexpr std::int64_t kDefaultHistoryWindow_ms = 30LL * 24 * 3600 * 1000;
// Idempotency-Key header length, 1..200 characters.
inline constexpr std::size_t kMaxIdempotencyKeyLength = 200;
// Bytes of randomness in a token's secret part (256 bits: far beyond
// guessing, so one keyed hash suffices to store it; a slow password hash is
// for low-entropy secrets typed by people).
inline constexpr std::size_t kTokenSecretBytes = 32;
inline constexpr std::size_t kTokenPublicIdBytes = 9;  // 18 hex characters
inline constexpr std::size_t kTokenSaltBytes = 16;

}  // namespace taut::server
