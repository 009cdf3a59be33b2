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
// Wall-time limit of one identification job (`taut serve --job-time-limit`):
// a modal identification takes well under a second, a time-domain fit of a
// long impact record some tens of seconds.
inline constexpr int kDefaultJobTimeLimit_s = 300;
// Active webhooks per organisation.
inline constexpr std::size_t kMaxWebhooksPerOrganisation = 20;
// Webhook URL length.
inline constexpr std::size_t kMaxWebhookUrlLength = 2048;
// Organisations whose webhooks are delivered at the same time (each on its
// own thread, so that a dead receiver delays only its own organisation).
inline constexpr int kMaxParallelWebhookOrganisations = 8;
// Structure names and descriptions.
inline constexpr std::size_t kMaxStructureNameLength = 200;  // the schema's CHECK
inline constexpr std::size_t kMaxStructureDescriptionLength = 4000;
// Force history without `from`: the last 30 days before `to`.
inline constexpr std::int64_t kDefaultHistoryWindow_ms = 30LL * 24 * 3600 * 1000;
// Uploaded samples: at most this magnitude after conversion to m/s^2
// (shock accelerometers reach about 1e5 g = 1e6 m/s^2; anything beyond is a
// unit or encoding error, and binary32 storage overflows near 3.4e38).
inline constexpr double kMaxAbsAcceleration_m_s2 = 1e6;
// recorded_at: not before 1900-01-01T00:00:00Z (-2208988800 s), not more
// than kMaxClockSkew_ms after the server's clock (a gateway's clock may run
// ahead; a record from the future is a clock or typing error).
inline constexpr std::int64_t kEarliestRecordedAt_unix_ms = -2208988800LL * 1000;
inline constexpr std::int64_t kMaxClockSkew_ms = 15LL * 60 * 1000;
// Idempotency-Key header length, 1..200 characters.
inline constexpr std::size_t kMaxIdempotencyKeyLength = 200;
// Bytes of randomness in a token's secret part (256 bits: far beyond
// guessing, so one keyed hash suffices to store it; a slow password hash is
// for low-entropy secrets typed by people).
inline constexpr std::size_t kTokenSecretBytes = 32;
inline constexpr std::size_t kTokenPublicIdBytes = 9;  // 18 hex characters
inline constexpr std::size_t kTokenSaltBytes = 16;

}  // namespace taut::server
