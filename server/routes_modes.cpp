// Identification from supplied modes over HTTP (issue 17; docs/API.md
// "Modes measured elsewhere"):
//   POST /v1/members/{id}/modes    upload
// The body is a supplied-modes document (docs/FORMATS.md section 4); the
// member's current description is the model. The identification runs
// synchronously (a modal fit of a few modes takes well under a second,
// bench_identify) and the result (docs/FORMATS.md section 3) is returned,
// not stored: stored estimates belong to records.
#include "estimation/supplied_modes.h"
#include "server/estimate_json.h"
#include "server/http_router.h"
#include "server/modes_json.h"
#include "server/routes.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

void IdentifyModes(Call& c) {
  storage::Member m;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
  const model::Member member = StoredDescription(m);
  estimation::SuppliedModes supplied;
  if (Status s = SuppliedModesFromJson(ParseBodyJson(c.body), member, &supplied); !s.ok()) {
    Fail(422, "unprocessable", s.message);
  }
  estimation::Estimate estimate;
  const Status s = estimation::IdentifySuppliedModes(member, supplied, {}, &estimate);
  if (!s.ok() && estimate.verdict.code != "unusable") Fail(422, "unprocessable", s.message);
  // A refusal is a result too (verdict "unusable"), shown with its cautions.
  nlohmann::json j = EstimateToJson(estimate);
  j["member"] = member.id;
  j["stored"] = false;
  SendJson(c.res, 200, j);
}

}  // namespace

void RegisterModesRoutes(Router& r) {
  r.Add("POST", "/v1/members/{id}/modes", storage::Role::kUpload, IdentifyModes);
}

}  // namespace taut::server
