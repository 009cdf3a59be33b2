// Repository: alerts, webhook subscriptions and their deliveries (repository.h).
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository.h"
#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

namespace {

StorageStatus TransitionAlert(Database& db, Id organisation_id, Id alert_id, std::int64_t now_unix_ms,
                              const char* update_sql, const char* allowed_from, const char* to) {
  Statement cur(db, "SELECT state FROM alert WHERE id = ?1 AND organisation_id = ?2");
  cur.Bind(1, alert_id).Bind(2, organisation_id);
  const int rc = cur.Step();
  if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("alert", alert_id) + " not found");
  if (rc != SQLITE_ROW) return cur.status();
  const std::string state = cur.Text(0);
  if (std::string_view(allowed_from).find(state) == std::string_view::npos) {
    return {SQLITE_CONSTRAINT, IdText("alert", alert_id) + " is " + state + "; only " + allowed_from +
                                   " alerts can become " + to};
  }
  Statement s(db, update_sql);
  s.Bind(1, alert_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
  return RunOneRow(s, IdText("alert", alert_id));
}
}  // namespace

StorageStatus Repository::RaiseAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                     Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement member(db_, "SELECT 1 FROM member WHERE id = ?1 AND organisation_id = ?2");
    member.Bind(1, alert.member_id).Bind(2, organisation_id);
    const int rc = member.Step();
    if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("member", alert.member_id) + " not found");
    if (rc != SQLITE_ROW) return member.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return InsertAlert(organisation_id, alert, now_unix_ms, id);
  });
}

StorageStatus Repository::RaiseAlertOnce(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                         Id* id, bool* created, bool unless_standing) {
  if (!alert.estimate_id) return Misuse("RaiseAlertOnce needs the alert's estimate_id");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    if (db_.is_postgres()) {
      // One member's alerts are decided one transaction at a time, whichever
      // replica runs them (the lock ends with the transaction). Key: the
      // member id; the migration lock's key (postgres_migrations.cpp) is no
      // member id in practice and would only wait the migration out.
      Statement lock(db_, "SELECT pg_advisory_xact_lock(?1)");
      lock.Bind(1, alert.member_id);
      if (lock.Step() != SQLITE_ROW) return lock.status();
    }
    if (unless_standing) {
      Statement standing(
          db_,
          "SELECT id FROM alert WHERE organisation_id = ?1 AND member_id = ?2 AND rule = ?3 AND "
          "state IN ('open', 'acknowledged') AND (estimate_id IS NULL OR estimate_id <> ?4) "
          "ORDER BY id LIMIT 1");
      standing.Bind(1, organisation_id)
          .Bind(2, alert.member_id)
          .Bind(3, alert.rule)
          .Bind(4, *alert.estimate_id);
      const int rc = standing.Step();
      if (rc == SQLITE_ROW) {
        *id = standing.Int64(0);
        *created = false;
        return {};
      }
      if (rc != SQLITE_DONE) return standing.status();
    }
    Statement existing(db_,
                       "SELECT id FROM alert WHERE organisation_id = ?1 AND member_id = ?2 AND rule = ?3 AND "
                       "estimate_id = ?4");
    existing.Bind(1, organisation_id)
        .Bind(2, alert.member_id)
        .Bind(3, alert.rule)
        .Bind(4, *alert.estimate_id);
    const int rc = existing.Step();
    if (rc == SQLITE_ROW) {
      *id = existing.Int64(0);
      *created = false;
      return {};
    }
    if (rc != SQLITE_DONE) return existing.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    StorageStatus r = InsertAlert(organisation_id, alert, now_unix_ms, id);
    // The composite foreign keys fail for another organisation's member or
    // estimate: not found, like every foreign id.
    if (r.sqlite_code == SQLITE_CONSTRAINT_FOREIGNKEY) {
      return StorageStatus::NotFound(IdText("member", alert.member_id) + " or " +
                                     IdText("estimate", *alert.estimate_id) + " not found");
    }
    if (!r.ok()) return r;
    *created = true;
    return {};
  });
}

// The INSERT of RaiseAlert and RaiseAlertOnce, inside their transaction.
StorageStatus Repository::InsertAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                      Id* id) {
  Statement s(db_,
              "INSERT INTO alert (organisation_id, member_id, estimate_id, rule, state, message, evidence, "
              "raised_at_unix_ms) VALUES (?1, ?2, ?3, ?4, 'open', ?5, ?6, ?7) RETURNING id");
  s.Bind(1, organisation_id)
      .Bind(2, alert.member_id)
      .Bind(3, alert.estimate_id)
      .Bind(4, alert.rule)
      .Bind(5, alert.message)
      .Bind(6, alert.evidence)
      .Bind(7, now_unix_ms);
  if (StorageStatus r = InsertReturningId(s, id); !r.ok()) return r;
  return {};
}

StorageStatus Repository::GetAlert(Id organisation_id, Id alert_id, Alert* out) {
  Statement s(db_,
              std::string("SELECT ") + kAlertColumns + " FROM alert WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, alert_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("alert", alert_id), [&](const Statement& r) { *out = ReadAlert(r); });
}

StorageStatus Repository::ListAlerts(Id organisation_id, const AlertFilter& filter, std::vector<Alert>* out) {
  // NULL parameters switch a filter off, so one statement serves every
  // combination without building SQL text (the CAST types the NULL for
  // PostgreSQL, which cannot infer a parameter from "IS NULL").
  Statement s(db_, std::string("SELECT ") + kAlertColumns +
                       " FROM alert WHERE organisation_id = ?1 AND (?2 IS NULL OR member_id = ?2) AND "
                       "(CAST(?3 AS TEXT) IS NULL OR state = ?3) ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, filter.member_id);
  if (filter.state) {
    s.Bind(3, std::string_view(AlertStateName(*filter.state)));
  } else {
    s.BindNull(3);
  }
  return ReadAll(s, out, ReadAlert);
}

StorageStatus Repository::AcknowledgeAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return TransitionAlert(db_, organisation_id, alert_id, now_unix_ms,
                           "UPDATE alert SET state = 'acknowledged', acknowledged_at_unix_ms = ?3 "
                           "WHERE id = ?1 AND organisation_id = ?2",
                           "open", "acknowledged");
  });
}

StorageStatus Repository::ResolveAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return TransitionAlert(db_, organisation_id, alert_id, now_unix_ms,
                           "UPDATE alert SET state = 'resolved', resolved_at_unix_ms = ?3 "
                           "WHERE id = ?1 AND organisation_id = ?2",
                           "open or acknowledged", "resolved");
  });
}

StorageStatus Repository::CreateWebhook(Id organisation_id, std::string_view url, std::string_view secret,
                                        std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "INSERT INTO webhook_subscription (organisation_id, url, secret, active, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, 1, ?4) RETURNING id");
    s.Bind(1, organisation_id).Bind(2, url).BindBlob(3, secret.data(), secret.size()).Bind(4, now_unix_ms);
    if (StorageStatus r = InsertReturningId(s, id); !r.ok()) return r;
    return {};
  });
}

StorageStatus Repository::ListWebhooks(Id organisation_id, bool active_only, std::vector<Webhook>* out) {
  Statement s(db_,
              "SELECT id, organisation_id, url, secret, active, created_at_unix_ms FROM webhook_subscription "
              "WHERE organisation_id = ?1 AND (?2 = 0 OR active = 1) ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, static_cast<std::int64_t>(active_only ? 1 : 0));
  return ReadAll(s, out, [](const Statement& r) {
    return Webhook{r.Int64(0), r.Int64(1), r.Text(2), r.Blob(3), r.Int64(4) != 0, r.Int64(5)};
  });
}

StorageStatus Repository::DeactivateWebhook(Id organisation_id, Id webhook_id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_, "UPDATE webhook_subscription SET active = 0 WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, webhook_id).Bind(2, organisation_id);
    return RunOneRow(s, IdText("webhook", webhook_id));
  });
}

StorageStatus Repository::RecordDelivery(Id organisation_id, const DeliveryAttempt& a, Id* id) {
  if (a.attempt < 1) return Misuse("delivery attempt " + std::to_string(a.attempt) + " must be >= 1");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "INSERT INTO webhook_delivery (organisation_id, subscription_id, alert_id, attempt, "
                "attempted_at_unix_ms, http_status, error, succeeded, next_attempt_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9) RETURNING id");
    s.Bind(1, organisation_id)
        .Bind(2, a.subscription_id)
        .Bind(3, a.alert_id)
        .Bind(4, static_cast<std::int64_t>(a.attempt))
        .Bind(5, a.attempted_at_unix_ms);
    if (a.http_status) {
      s.Bind(6, static_cast<std::int64_t>(*a.http_status));
    } else {
      s.BindNull(6);
    }
    s.Bind(7, a.error)
        .Bind(8, static_cast<std::int64_t>(a.succeeded ? 1 : 0))
        .Bind(9, a.next_attempt_at_unix_ms);
    Id new_id = 0;
    StorageStatus r = InsertReturningId(s, &new_id);
    // A subscription or alert of another organisation fails the composite
    // foreign key; report it as not found, like every foreign id.
    if (r.sqlite_code == SQLITE_CONSTRAINT_FOREIGNKEY) {
      return StorageStatus::NotFound(IdText("webhook", a.subscription_id) + " or " +
                                     IdText("alert", a.alert_id) + " not found");
    }
    if (!r.ok()) return r;
    *id = new_id;
    return {};
  });
}

StorageStatus Repository::ListDeliveries(Id organisation_id, Id alert_id, std::vector<DeliveryAttempt>* out) {
  Statement s(
      db_,
      "SELECT id, subscription_id, alert_id, attempt, attempted_at_unix_ms, http_status, error, succeeded, "
      "next_attempt_at_unix_ms FROM webhook_delivery WHERE organisation_id = ?1 AND alert_id = ?2 "
      "ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, alert_id);
  return ReadAll(s, out, [](const Statement& r) {
    DeliveryAttempt a;
    a.id = r.Int64(0);
    a.subscription_id = r.Int64(1);
    a.alert_id = r.Int64(2);
    a.attempt = static_cast<int>(r.Int64(3));
    a.attempted_at_unix_ms = r.Int64(4);
    if (!r.IsNull(5)) a.http_status = static_cast<int>(r.Int64(5));
    a.error = r.Text(6);
    a.succeeded = r.Int64(7) != 0;
    a.next_attempt_at_unix_ms = r.OptionalInt64(8);
    return a;
  });
}

StorageStatus Repository::DueDeliveries(std::int64_t now_unix_ms, std::size_t limit,
                                        std::vector<DueDelivery>* out) {
  // One row per (subscription, alert) pair; `last` is its latest attempt
  // (NULL columns when there is none). Alerts are few (a handful per member
  // and year), so the join over every pair is cheap.
  Statement s(db_,
              "SELECT w.organisation_id, w.id, w.url, w.secret, a.id, coalesce(last.attempt, 0) + 1, "
              "       coalesce(last.next_attempt_at_unix_ms, a.raised_at_unix_ms) AS due "
              "FROM alert a "
              "JOIN webhook_subscription w ON w.organisation_id = a.organisation_id AND w.active = 1 "
              "     AND a.raised_at_unix_ms >= w.created_at_unix_ms "
              "LEFT JOIN webhook_delivery last ON last.subscription_id = w.id AND last.alert_id = a.id "
              "     AND last.attempt = (SELECT max(attempt) FROM webhook_delivery d "
              "                         WHERE d.subscription_id = w.id AND d.alert_id = a.id) "
              "WHERE (last.id IS NULL OR (last.succeeded = 0 AND last.next_attempt_at_unix_ms IS NOT NULL)) "
              "  AND coalesce(last.next_attempt_at_unix_ms, a.raised_at_unix_ms) <= ?1 "
              "ORDER BY due, a.id, w.id LIMIT ?2");
  s.Bind(1, now_unix_ms).Bind(2, static_cast<std::int64_t>(limit));
  return ReadAll(s, out, [](const Statement& r) {
    DueDelivery d;
    d.organisation_id = r.Int64(0);
    d.subscription_id = r.Int64(1);
    d.url = r.Text(2);
    d.secret = r.Blob(3);
    d.alert_id = r.Int64(4);
    d.attempt = static_cast<int>(r.Int64(5));
    d.due_at_unix_ms = r.Int64(6);
    return d;
  });
}

StorageStatus Repository::ClaimDelivery(const DueDelivery& d, std::string_view owner,
                                        std::int64_t now_unix_ms, std::int64_t duration_ms, bool* claimed) {
  *claimed = false;
  if (owner.empty() || duration_ms <= 0) return Misuse("a delivery claim needs its owner and a duration > 0");
  return Write([&]() -> StorageStatus {
    *claimed = false;  // again on a retry (statement.h)
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement logged(db_,
                     "SELECT 1 FROM webhook_delivery WHERE subscription_id = ?1 AND alert_id = ?2 AND "
                     "attempt >= ?3 LIMIT 1");
    logged.Bind(1, d.subscription_id).Bind(2, d.alert_id).Bind(3, static_cast<std::int64_t>(d.attempt));
    const int rc = logged.Step();
    if (rc == SQLITE_ROW) return {};  // made already, by this replica or another
    if (rc != SQLITE_DONE) return logged.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    // A new claim, or the takeover of an expired one; a live claim of
    // another owner leaves the row as it is and returns no row.
    Statement claim(db_,
                    "INSERT INTO webhook_delivery_claim (subscription_id, alert_id, attempt, owner, "
                    "expires_at_unix_ms) VALUES (?1, ?2, ?3, ?4, ?5) ON CONFLICT (subscription_id, alert_id, "
                    "attempt) DO UPDATE SET owner = excluded.owner, expires_at_unix_ms = "
                    "excluded.expires_at_unix_ms WHERE webhook_delivery_claim.expires_at_unix_ms <= ?6 "
                    "RETURNING owner");
    claim.Bind(1, d.subscription_id)
        .Bind(2, d.alert_id)
        .Bind(3, static_cast<std::int64_t>(d.attempt))
        .Bind(4, owner)
        .Bind(5, now_unix_ms + duration_ms)
        .Bind(6, now_unix_ms);
    const int crc = claim.Step();
    if (crc == SQLITE_DONE) return {};
    if (crc != SQLITE_ROW) return claim.status();
    if (claim.Step() != SQLITE_DONE) return claim.status();
    *claimed = true;
    return {};
  });
}

}  // namespace taut::storage
