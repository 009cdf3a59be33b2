#include "server/routes.h"

namespace taut::server {

void RegisterRoutes(Router& r) {
  RegisterServiceRoutes(r);
  RegisterStructureRoutes(r);
  RegisterMemberRoutes(r);
  RegisterRecordUploadRoutes(r);
  RegisterRecordRoutes(r);
  RegisterEstimateRoutes(r);
  RegisterAlertRoutes(r);
  RegisterWebhookRoutes(r);
  RegisterTokenRoutes(r);
  RegisterUiRoutes(r);
}

}  // namespace taut::server
