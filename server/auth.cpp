#include "server/auth.h"

#include <openssl/crypto.h>

#include "server/hashing.h"
#include "server/service_limits.h"

namespace taut::server {

namespace {

constexpr std::string_view kTokenPrefix = "taut_";

bool IsLowerHex(std::string_view s) {
  for (char c : s) {
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return !s.empty();
}

}  // namespace

storage::StorageStatus IssueToken(storage::Repository& repo, storage::Id organisation_id, storage::Role role,
                                  std::string_view label, std::int64_t now_unix_ms, std::string* token) {
  const std::string id_bytes = RandomBytes(kTokenPublicIdBytes);
  const std::string secret_bytes = RandomBytes(kTokenSecretBytes);
  storage::NewToken t;
  t.public_id = ToHex(id_bytes);
  const std::string secret = ToHex(secret_bytes);
  t.salt = RandomBytes(kTokenSaltBytes);
  t.hash = HmacSha256Raw(t.salt, secret);
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
  const std::string hash = HmacSha256Raw(stored.salt, secret);
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
