// Repository: organisations and API tokens (repository.h).
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository.h"
#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

namespace {

constexpr const char* kTokenColumns =
    "id, organisation_id, public_id, salt, hash, label, role, created_at_unix_ms, revoked_at_unix_ms";

Token ReadToken(const Statement& r) {
  Token t;
  t.id = r.Int64(0);
  t.organisation_id = r.Int64(1);
  t.public_id = r.Text(2);
  t.salt = r.Blob(3);
  t.hash = r.Blob(4);
  t.label = r.Text(5);
  t.role = ParseRole(r.Text(6)).value_or(Role::kRead);
  t.created_at_unix_ms = r.Int64(7);
  t.revoked_at_unix_ms = r.OptionalInt64(8);
  return t;
}
}  // namespace

StorageStatus Repository::CreateOrganisation(std::string_view name, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_, "INSERT INTO organisation (name, created_at_unix_ms) VALUES (?1, ?2) RETURNING id");
    s.Bind(1, name).Bind(2, now_unix_ms);
    if (StorageStatus r = InsertReturningId(s, id); !r.ok()) return r;
    return {};
  });
}

StorageStatus Repository::GetOrganisation(Id organisation_id, Organisation* out) {
  Statement s(db_, "SELECT id, name, created_at_unix_ms FROM organisation WHERE id = ?1");
  s.Bind(1, organisation_id);
  return ReadOne(s, IdText("organisation", organisation_id), [&](const Statement& r) {
    *out = {r.Int64(0), r.Text(1), r.Int64(2)};
  });
}

StorageStatus Repository::FindOrganisationByName(std::string_view name, Organisation* out) {
  Statement s(db_, "SELECT id, name, created_at_unix_ms FROM organisation WHERE name = ?1");
  s.Bind(1, name);
  return ReadOne(s, "organisation \"" + std::string(name) + "\"", [&](const Statement& r) {
    *out = {r.Int64(0), r.Text(1), r.Int64(2)};
  });
}

StorageStatus Repository::CreateToken(Id organisation_id, const NewToken& token, std::int64_t now_unix_ms,
                                      Id* id) {
  if (token.salt.empty() || token.hash.empty()) return Misuse("token salt and hash must not be empty");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(
        db_,
        "INSERT INTO api_token (organisation_id, public_id, salt, hash, role, label, created_at_unix_ms) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7) RETURNING id");
    s.Bind(1, organisation_id)
        .Bind(2, token.public_id)
        .BindBlob(3, token.salt.data(), token.salt.size())
        .BindBlob(4, token.hash.data(), token.hash.size())
        .Bind(5, std::string_view(RoleName(token.role)))
        .Bind(6, token.label)
        .Bind(7, now_unix_ms);
    if (StorageStatus r = InsertReturningId(s, id); !r.ok()) return r;
    return {};
  });
}

StorageStatus Repository::FindToken(std::string_view public_id, Token* out) {
  Statement s(db_, std::string("SELECT ") + kTokenColumns + " FROM api_token WHERE public_id = ?1");
  s.Bind(1, public_id);
  return ReadOne(s, "token", [&](const Statement& r) { *out = ReadToken(r); });
}

StorageStatus Repository::ListTokens(Id organisation_id, std::vector<Token>* out) {
  Statement s(
      db_, std::string("SELECT ") + kTokenColumns + " FROM api_token WHERE organisation_id = ?1 ORDER BY id");
  s.Bind(1, organisation_id);
  return ReadAll(s, out, ReadToken);
}

StorageStatus Repository::RevokeToken(Id organisation_id, Id token_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE api_token SET revoked_at_unix_ms = coalesce(revoked_at_unix_ms, ?3) "
                "WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, token_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(s, IdText("token", token_id));
  });
}

}  // namespace taut::storage
