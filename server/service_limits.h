// Limits and defaults of the HTTP service, in one place (STYLE.md item 15).
// Every value carries its unit in its name.
#pragma once

#include <cstddef>
#include <cstdint>

namespace taut::server {

// Request body limit (`taut serve --max-body`, MiB): a 300 s, 3-channel,
// 512 Hz CSV is about 15 MiB, so 64 MiB leaves room for long records.
inline constexpr std::size_t kDefaultMaxBody_mib = 64;
// Socket timeouts of the HTTP server: a gateway on a slow mobile link may
// take a while to send a large record.
inline constexpr int kReadTimeout_s = 60;
inline constexpr int kWriteTimeout_s = 60;
// Threads answering HTTP requests (cpp-httplib's task queue).
inline constexpr int kHttpThreads = 8;
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
