#include "server/webhook_delivery.h"

#include <algorithm>
#include <chrono>
#include <string>

#include "server/api_json.h"
#include "server/hashing.h"
#include "server/iso_time.h"
#include "server/webhook_policy.h"

// glibc's <resolv.h>, which httplib pulls in, defines the macro _res (a
// parameter name inside Eigen): include httplib after anything Eigen.
#include <httplib.h>

namespace taut::server {

using storage::Id;
using storage::StorageStatus;

// One POST of the alert to the subscription's URL, logged as an attempt.
void DeliverWebhook(storage::Repository& repo, const storage::Repository::DueDelivery& d,
                    const WorkerOptions& options, Metrics* metrics, const LogLine& log) {
  storage::DeliveryAttempt attempt;
  attempt.subscription_id = d.subscription_id;
  attempt.alert_id = d.alert_id;
  attempt.attempt = d.attempt;
  attempt.attempted_at_unix_ms = NowUnixMs();
  storage::Alert alert;
  if (StorageStatus s = repo.GetAlert(d.organisation_id, d.alert_id, &alert); !s.ok()) {
    {
      log("level=error webhook alert=" + std::to_string(d.alert_id) + ": " + s.message);
      return;
    }
  }
  const std::string body = AlertToJson(alert).dump();
  // The URL is resolved and checked again now (DNS may have changed since
  // the webhook was created), and the connection goes to the address that
  // was checked.
  WebhookTarget target;
  const Status allowed = ResolveWebhookTarget(d.url, options.webhook_policy, &target);
  const std::string host_text =
      target.host.find(':') != std::string::npos ? "[" + target.host + "]" : target.host;
  httplib::Client client(target.scheme + "://" + host_text + ":" + std::to_string(target.port));
  client.set_hostname_addr_map({{target.host, target.address}});
  const auto timeout_s = std::chrono::duration_cast<std::chrono::seconds>(options.webhook_timeout).count();
  client.set_connection_timeout(std::max<long>(1, timeout_s), 0);
  client.set_read_timeout(std::max<long>(1, timeout_s), 0);
  client.set_write_timeout(std::max<long>(1, timeout_s), 0);
  httplib::Headers headers = {{"X-Taut-Signature", "sha256=" + HmacSha256Hex(d.secret, body)},
                              {"X-Taut-Delivery-Attempt", std::to_string(d.attempt)}};
  const std::string& path = target.path;
  if (!allowed.ok()) {
    attempt.error = "refused: " + allowed.message;
  } else if (!client.is_valid()) {
    attempt.error = "invalid webhook URL " + d.url;
  } else if (auto res = client.Post(path, headers, body, "application/json")) {
    attempt.http_status = res->status;
    attempt.succeeded = res->status >= 200 && res->status < 300;
    if (!attempt.succeeded) attempt.error = "HTTP " + std::to_string(res->status);
  } else {
    attempt.error = httplib::to_string(res.error());
  }
  if (!attempt.succeeded && d.attempt < options.webhook_max_attempts) {
    // Exponential back-off: first_backoff * 2^(attempt - 1).
    const auto backoff = options.webhook_first_backoff.count() * (std::int64_t{1} << (d.attempt - 1));
    attempt.next_attempt_at_unix_ms = NowUnixMs() + backoff;
  }
  if (metrics) metrics->RecordWebhookAttempt(attempt.succeeded);
  Id id = 0;
  if (StorageStatus s = repo.RecordDelivery(d.organisation_id, attempt, &id); !s.ok()) {
    log("level=error webhook delivery log: " + s.message);
  }
  log(std::string("level=") + (attempt.succeeded ? "info" : "warn") +
      " webhook=" + std::to_string(d.subscription_id) + " alert=" + std::to_string(d.alert_id) +
      " attempt=" + std::to_string(d.attempt) + " succeeded=" + (attempt.succeeded ? "1" : "0") +
      (attempt.error.empty() ? "" : " error=\"" + attempt.error + "\""));
}

}  // namespace taut::server
