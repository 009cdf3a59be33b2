// API tokens: issue, store (salted hash only) and check bearer tokens.
//
// A token reads "taut_<public id>_<secret>", both parts lowercase hex. The
// public id (kTokenPublicIdBytes random bytes) finds the stored row; the
// secret (kTokenSecretBytes random bytes from OpenSSL's RAND_bytes) is kept
// only as HMAC-SHA256(key = a per-token random salt, message = secret)
// (RFC 2104; FIPS 180-4), compared in constant time (CRYPTO_memcmp). The
// plain token is shown once, when it is issued. The primitives are in
// hashing.h.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "storage/repository.h"

namespace taut::server {

// Issues a token for the organisation with `role`; *token receives the
// plain token. Fails only on storage errors (message from storage).
storage::StorageStatus IssueToken(storage::Repository& repo, storage::Id organisation_id, storage::Role role,
                                  std::string_view label, std::int64_t now_unix_ms, std::string* token);

struct Principal {
  storage::Id organisation_id = 0;
  storage::Role role = storage::Role::kRead;
  storage::Id token_id = 0;
};

enum class AuthOutcome {
  kOk,
  kMissing,       // no Authorization header
  kMalformed,     // not "Bearer taut_<id>_<secret>"
  kRejected,      // unknown id, wrong secret or revoked (one answer for all three)
  kStorageError,  // the database failed: not the client's fault
};

// Checks an Authorization header value. On kOk fills *principal.
AuthOutcome Authenticate(storage::Repository& repo, std::string_view authorization_header,
                         Principal* principal, std::string* storage_error);

// true when `have` is at least `need` (read < upload < admin).
bool RoleAtLeast(storage::Role have, storage::Role need);

}  // namespace taut::server
