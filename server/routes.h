// The route table of the v1 API (docs/API.md), one Register function per
// resource (routes_<resource>.cpp), and the helpers that more than one
// resource's handlers share. Internal to server/.
#pragma once

#include <nlohmann/json.hpp>

#include "model/member.h"
#include "server/http_router.h"

namespace taut::server {

// Registers every route of the API, in the order they are matched.
void RegisterRoutes(Router& r);

void RegisterAssetFileRoutes(Router& r);     // routes_common.cpp (logbook, CSV, triage, report)
void RegisterServiceRoutes(Router& r);       // routes_service.cpp
void RegisterStructureRoutes(Router& r);     // routes_structures.cpp
void RegisterMemberRoutes(Router& r);        // routes_members.cpp
void RegisterRecordUploadRoutes(Router& r);  // record_upload.cpp
void RegisterRecordRoutes(Router& r);        // routes_records.cpp
void RegisterEstimateRoutes(Router& r);      // routes_estimates.cpp
void RegisterModesRoutes(Router& r);         // routes_modes.cpp (supplied modes, issue 17)
void RegisterAlertRoutes(Router& r);         // routes_alerts.cpp
void RegisterWebhookRoutes(Router& r);       // routes_webhooks.cpp
void RegisterTokenRoutes(Router& r);         // routes_tokens.cpp
void RegisterUiRoutes(Router& r);            // routes_ui.cpp (keep last: "/ui/**")

// The stored description of a member version as the model reads it (500 if
// a stored description no longer parses). routes_members.cpp.
model::Member StoredDescription(const storage::Member& m);
// Drift settings of a member: the stored ones over the defaults, with
// "defaults": true when none are stored. routes_members.cpp.
nlohmann::json DriftSettingsBody(Call& c, const storage::Member& m);

}  // namespace taut::server
