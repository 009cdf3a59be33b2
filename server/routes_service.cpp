// Service routes: health, metrics and the caller's identity.
#include <map>

#include "server/http_router.h"
#include "server/routes.h"
#include "storage/migrations.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void Health(Call& c) {
  int version = 0;
  Check(storage::SchemaVersion(c.db, &version));
  SendJson(c.res, 200, {{"status", "ok"}, {"version", TAUT_VERSION_STRING}, {"schema_version", version}});
}

void MetricsText(Call& c) {
  std::map<std::string, std::int64_t> jobs;
  Check(c.repo.CountJobsByState(&jobs));
  c.res.status = 200;
  c.res.set_content(c.options.metrics->Render(jobs), "text/plain; version=0.0.4");
}

void Me(Call& c) {
  storage::Organisation org;
  Check(c.repo.GetOrganisation(c.who.organisation_id, &org));
  SendJson(c.res, 200,
           {{"organisation", {{"id", org.id}, {"name", org.name}}}, {"role", storage::RoleName(c.who.role)}});
}

}  // namespace

void RegisterServiceRoutes(Router& r) {
  r.Add("GET", "/v1/health", storage::Role::kRead, Health, /*auth=*/false);
  r.Add("GET", "/metrics", storage::Role::kRead, MetricsText, /*auth=*/false);
  r.Add("GET", "/v1/me", storage::Role::kRead, Me);
}

}  // namespace taut::server
