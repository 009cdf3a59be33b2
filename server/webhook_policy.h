// Where webhooks may point (issue: server-side request forgery). A webhook
// URL is resolved and refused when any address it resolves to is loopback,
// unspecified, link-local, private, shared (CGNAT), multicast or reserved,
// unless an operator allow-listed the range (`taut serve --webhook-allow
// CIDR`, repeatable). "http://2130706433/" and "http://0.0.0.0/" are caught
// because the check is on resolved addresses, not on the text.
//
// The same check runs again before every delivery, and the delivery
// connects to the address that was checked (no second lookup that DNS could
// answer differently).
#pragma once

#include <string>
#include <vector>

#include "model/status.h"

namespace taut::server {

struct Cidr {
  int family = 0;             // AF_INET or AF_INET6
  unsigned char bytes[16]{};  // network address (4 or 16 bytes used)
  int prefix_bits = 0;
};

// "10.0.0.0/8", "fd00::/8", "192.0.2.7" (a single address). false if malformed.
bool ParseCidr(const std::string& text, Cidr* out);

struct WebhookPolicy {
  std::vector<Cidr> allow;  // ranges allowed although not public
};

struct WebhookTarget {
  std::string scheme;  // "http" or "https"
  std::string host;    // as written (brackets removed for IPv6)
  int port = 0;
  std::string path;     // "/..." (at least "/")
  std::string address;  // the checked address to connect to (numeric)
};

// Parses `url` (http:// or https://, a host, an optional port and path),
// resolves the host and checks every address against the policy.
// kInvalidArgument with a message for the client on any failure.
Status ResolveWebhookTarget(const std::string& url, const WebhookPolicy& policy, WebhookTarget* out);

}  // namespace taut::server
