#include "server/auth.h"

#include <openssl/crypto.h>
#include <openssl/evp.h>
#include <openssl/hmac.h>
#include <openssl/rand.h>
#include <openssl/sha.h>

#include <stdexcept>

#include "server/service_limits.h"

namespace taut::server {

namespace {

constexpr std::string_view kTokenPrefix = "taut_";

std::string ToHex(const unsigned char* bytes, std::size_t n) {
  static constexpr char kDigits[] = "0123456789abcdef";
  std::string out(2 * n, '0');
  for (std::size_t i = 0; i < n; ++i) {
    out[2 * i] = kDigits[bytes[i] >> 4];
    out[2 * i + 1] = kDigits[bytes[i] & 15];
  }
  return out;
}

std::string RandomBytes(std::size_t n) {
  std::string bytes(n, '\0');
  if (RAND_bytes(reinterpret_cast<unsigned char*>(bytes.data()), static_cast<int>(n)) != 1) {
    // The CSPRNG failing is not recoverable for a token service; the CLI
    // and HTTP boundaries catch this and report it.
    throw std::runtime_error("OpenSSL RAND_bytes failed: no secure randomness for a token");
  }
  return bytes;
}

std::string HmacRaw(std::string_view key, std::string_view message) {
  unsigned char out[EVP_MAX_MD_SIZE];
  unsigned int len = 0;
  HMAC(EVP_sha256(), key.data(), static_cast<int>(key.size()),
       reinterpret_cast<const unsigned char*>(message.data()), message.size(), out, &len);
  return std::string(reinterpret_cast<const char*>(out), len);
}

bool IsLowerHex(std::string_view s) {
  for (char c : s) {
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return !s.empty();
}

}  // namespace

std::string Sha256Hex(std::string_view bytes) {
  unsigned char digest[SHA256_DIGEST_LENGTH];
  SHA256(reinterpret_cast<const unsigned char*>(bytes.data()), bytes.size(), digest);
  return ToHex(digest, sizeof digest);
}

std::string HmacSha256Hex(std::string_view key, std::string_view message) {
  const std::string raw = HmacRaw(key, message);
  return ToHex(reinterpret_cast<const unsigned char*>(raw.data()), raw.size());
}

std::string RandomHex(std::size_t n) {
  const std::string bytes = RandomBytes(n);
  return ToHex(reinterpret_cast<const unsigned char*>(bytes.data()), bytes.size());
}

storage::StorageStatus IssueToken(storage::Repository& repo, storage::Id organisation_id, storage::Role role,
                                  std::string_view label, std::int64_t now_unix_ms, std::string* token) {
  const std::string id_bytes = RandomBytes(kTokenPublicIdBytes);
  const std::string secret_bytes = RandomBytes(kTokenSecretBytes);
  storage::NewToken t;
  t.public_id = ToHex(reinterpret_cast<const unsigned char*>(id_bytes.data()), id_bytes.size());
  const std::string secret =
      ToHex(reinterpret_cast<const unsigned char*>(secret_bytes.data()), secret_bytes.size());
  t.salt = RandomBytes(kTokenSaltBytes);
  t.hash = HmacRaw(t.salt, secret);
  t.role = role;
  t.label = std::string(label);
  storage::Id id = 0;
  if (storage::StorageStatus s = repo.CreateToken(organisation_id, t, now_unix_ms, &id); !s.ok()) return s;
  *token = std::string(kTokenPrefix) + t.public_id + "_" + secret;
  return {};
}

AuthOutcome Authenticate(storage::Repository& repo, std::string_view header, Principal* principal,
                         std::string* storage_error) {
  if (header.empty()) return AuthOutcome::kMissing;
  constexpr std::string_view kScheme = "Bearer ";
  if (header.size() <= kScheme.size() || header.substr(0, kScheme.size()) != kScheme) {
    return AuthOutcome::kMalformed;
  }
  std::string_view token = header.substr(kScheme.size());
  while (!token.empty() && token.back() == ' ') token.remove_suffix(1);
  if (token.substr(0, kTokenPrefix.size()) != kTokenPrefix) return AuthOutcome::kMalformed;
  token.remove_prefix(kTokenPrefix.size());
  const auto sep = token.find('_');
  if (sep == std::string_view::npos) return AuthOutcome::kMalformed;
  const std::string_view public_id = token.substr(0, sep), secret = token.substr(sep + 1);
  if (public_id.size() != 2 * kTokenPublicIdBytes || secret.size() != 2 * kTokenSecretBytes ||
      !IsLowerHex(public_id) || !IsLowerHex(secret)) {
    return AuthOutcome::kMalformed;
  }
  storage::Token stored;
  if (storage::StorageStatus s = repo.FindToken(public_id, &stored); !s.ok()) {
    if (s.not_found()) return AuthOutcome::kRejected;
    *storage_error = s.message;
    return AuthOutcome::kStorageError;
  }
  const std::string hash = HmacRaw(stored.salt, secret);
  if (hash.size() != stored.hash.size() || CRYPTO_memcmp(hash.data(), stored.hash.data(), hash.size()) != 0 ||
      stored.revoked_at_unix_ms) {
    return AuthOutcome::kRejected;
  }
  principal->organisation_id = stored.organisation_id;
  principal->role = stored.role;
  principal->token_id = stored.id;
  return AuthOutcome::kOk;
}

bool RoleAtLeast(storage::Role have, storage::Role need) {
  return static_cast<int>(have) >= static_cast<int>(need);
}

}  // namespace taut::server
