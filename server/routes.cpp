#include "server/routes.h"

namespace taut::server {

void RegisterRoutes(Router& r) {
  // First: a route of these with a condition (?format=csv) answers instead
  // of the core route of the same path when the condition holds.
  RegisterAssetFileRoutes(r);
  RegisterServiceRoutes(r);
  RegisterStructureRoutes(r);
  RegisterMemberRoutes(r);
  RegisterRecordUploadRoutes(r);
  RegisterRecordRoutes(r);
  RegisterEstimateRoutes(r);
  RegisterModesRoutes(r);
  RegisterAlertRoutes(r);
  RegisterWebhookRoutes(r);
  RegisterTokenRoutes(r);
  RegisterUiRoutes(r);
}

}  // namespace taut::server
