// Hashing and randomness over OpenSSL: SHA-256 (FIPS 180-4), HMAC-SHA256
// (RFC 2104) and the CSPRNG (RAND_bytes). Hex output is lowercase.
//
// Used for record content hashes, token storage (auth.h) and webhook
// signatures (webhook_delivery.h).
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

namespace taut::server {

// Lowercase hex of the bytes (2 characters per byte).
std::string ToHex(std::string_view bytes);

std::string Sha256Hex(std::string_view bytes);

// The raw 32-byte HMAC-SHA256 of `message` under `key`, and its hex form.
std::string HmacSha256Raw(std::string_view key, std::string_view message);
std::string HmacSha256Hex(std::string_view key, std::string_view message);

// n bytes from OpenSSL's CSPRNG (RAND_bytes). Throws std::runtime_error
// when the CSPRNG fails (not recoverable for a token service; the CLI and
// HTTP boundaries catch and report it).
std::string RandomBytes(std::size_t n);
// n random bytes as 2n lowercase hex characters.
std::string RandomHex(std::size_t n);

}  // namespace taut::server
