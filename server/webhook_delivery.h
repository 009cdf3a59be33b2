// Delivery of alerts to webhook subscriptions (docs/API.md "Alerts and
// webhooks"): one POST of the alert JSON, signed with HMAC-SHA256 of the
// subscription's secret (X-Taut-Signature), logged as an attempt; a failed
// attempt is retried with exponential back-off. Run by the webhook thread of
// the worker pool (worker.h).
#pragma once

#include "server/drift_alerts.h"
#include "server/metrics.h"
#include "server/worker.h"
#include "storage/repository.h"

namespace taut::server {

// One attempt of `d`, recorded in the delivery log (with the next attempt's
// time unless it succeeded or was the last of options.webhook_max_attempts).
// metrics may be null.
void DeliverWebhook(storage::Repository& repo, const storage::Repository::DueDelivery& d,
                    const WorkerOptions& options, Metrics* metrics, const LogLine& log);

}  // namespace taut::server
