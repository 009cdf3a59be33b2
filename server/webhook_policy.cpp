#include "server/webhook_policy.h"

#include <arpa/inet.h>
#include <netdb.h>
#include <netinet/in.h>
#include <sys/socket.h>

#include <cstring>

#include "server/safe_text.h"

namespace taut::server {

namespace {

bool InRange(const Cidr& c, int family, const unsigned char* bytes) {
  if (c.family != family) return false;
  int bits = c.prefix_bits;
  for (int i = 0; bits > 0; ++i, bits -= 8) {
    const unsigned char mask = bits >= 8 ? 0xff : static_cast<unsigned char>(0xff << (8 - bits));
    if ((bytes[i] & mask) != (c.bytes[i] & mask)) return false;
  }
  return true;
}

// Ranges that are not the public internet (IANA special-purpose address
// registries, RFC 6890 and its updates).
const std::vector<Cidr>& NonPublic() {
  static const std::vector<Cidr> ranges = [] {
    std::vector<Cidr> r;
    for (const char* t :
         {"0.0.0.0/8", "10.0.0.0/8", "100.64.0.0/10", "127.0.0.0/8", "169.254.0.0/16", "172.16.0.0/12",
          "192.0.0.0/24", "192.168.0.0/16", "198.18.0.0/15", "224.0.0.0/4", "240.0.0.0/4", "::/128",
          "::1/128", "fc00::/7", "fe80::/10", "ff00::/8", "64:ff9b::/96", "2001:db8::/32"}) {
      Cidr c;
      ParseCidr(t, &c);
      r.push_back(c);
    }
    return r;
  }();
  return ranges;
}

// An empty string when the address may be used, else why not.
std::string Refusal(int family, const unsigned char* bytes, const WebhookPolicy& policy) {
  for (const Cidr& a : policy.allow) {
    if (InRange(a, family, bytes)) return "";
  }
  // IPv4-mapped IPv6 (::ffff:a.b.c.d) is judged as the IPv4 address.
  static const unsigned char kMapped[12] = {0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0xff, 0xff};
  if (family == AF_INET6 && std::memcmp(bytes, kMapped, 12) == 0) return Refusal(AF_INET, bytes + 12, policy);
  for (const Cidr& n : NonPublic()) {
    if (InRange(n, family, bytes)) return "not a public address (loopback, private, link-local or reserved)";
  }
  return "";
}

}  // namespace

bool ParseCidr(const std::string& text, Cidr* out) {
  const auto slash = text.find('/');
  const std::string addr = text.substr(0, slash);
  Cidr c;
  if (inet_pton(AF_INET, addr.c_str(), c.bytes) == 1) {
    c.family = AF_INET;
  } else if (inet_pton(AF_INET6, addr.c_str(), c.bytes) == 1) {
    c.family = AF_INET6;
  } else {
    return false;
  }
  const int max_bits = c.family == AF_INET ? 32 : 128;
  c.prefix_bits = max_bits;
  if (slash != std::string::npos) {
    const std::string bits = text.substr(slash + 1);
    if (bits.empty() || bits.size() > 3 || bits.find_first_not_of("0123456789") != std::string::npos)
      return false;
    c.prefix_bits = std::stoi(bits);
    if (c.prefix_bits > max_bits) return false;
  }
  *out = c;
  return true;
}

Status ResolveWebhookTarget(const std::string& url, const WebhookPolicy& policy, WebhookTarget* out) {
  WebhookTarget t;
  std::string rest;
  if (url.rfind("http://", 0) == 0) {
    t.scheme = "http";
    t.port = 80;
    rest = url.substr(7);
  } else if (url.rfind("https://", 0) == 0) {
    t.scheme = "https";
    t.port = 443;
    rest = url.substr(8);
  } else {
    return Status::InvalidArgument("must start with http:// or https://");
  }
  const auto path_at = rest.find_first_of("/?#");
  std::string authority = rest.substr(0, path_at);
  t.path = path_at == std::string::npos ? "/" : rest.substr(path_at);
  if (t.path.front() != '/') t.path = "/" + t.path;
  if (authority.find('@') != std::string::npos)
    return Status::InvalidArgument("user information is not allowed");
  std::string port_text;
  if (!authority.empty() && authority.front() == '[') {
    const auto close = authority.find(']');
    if (close == std::string::npos) return Status::InvalidArgument("unclosed [ in the host");
    t.host = authority.substr(1, close - 1);
    if (close + 1 < authority.size()) {
      if (authority[close + 1] != ':') return Status::InvalidArgument("malformed host");
      port_text = authority.substr(close + 2);
    }
  } else {
    const auto colon = authority.find(':');
    t.host = authority.substr(0, colon);
    if (colon != std::string::npos) port_text = authority.substr(colon + 1);
  }
  if (t.host.empty() || t.host.size() > 253) return Status::InvalidArgument("the host is empty or too long");
  if (!port_text.empty()) {
    if (port_text.size() > 5 || port_text.find_first_not_of("0123456789") != std::string::npos) {
      return Status::InvalidArgument("the port is not a number");
    }
    t.port = std::stoi(port_text);
    if (t.port < 1 || t.port > 65535) return Status::InvalidArgument("the port is outside 1..65535");
  }
  addrinfo hints{};
  hints.ai_socktype = SOCK_STREAM;
  addrinfo* list = nullptr;
  if (const int rc = getaddrinfo(t.host.c_str(), nullptr, &hints, &list); rc != 0) {
    return Status::InvalidArgument("the host \"" + Excerpt(t.host) + "\" does not resolve (" +
                                   gai_strerror(rc) + ")");
  }
  std::string refusal;
  for (addrinfo* a = list; a && refusal.empty(); a = a->ai_next) {
    char text[INET6_ADDRSTRLEN] = {};
    const unsigned char* bytes = nullptr;
    if (a->ai_family == AF_INET) {
      bytes = reinterpret_cast<const unsigned char*>(&reinterpret_cast<sockaddr_in*>(a->ai_addr)->sin_addr);
    } else if (a->ai_family == AF_INET6) {
      bytes = reinterpret_cast<const unsigned char*>(&reinterpret_cast<sockaddr_in6*>(a->ai_addr)->sin6_addr);
    } else {
      continue;
    }
    inet_ntop(a->ai_family, bytes, text, sizeof text);
    if (std::string why = Refusal(a->ai_family, bytes, policy); !why.empty()) {
      refusal = "the host \"" + Excerpt(t.host) + "\" resolves to " + text + ": " + why +
                " (an operator may allow a range with taut serve --webhook-allow CIDR)";
    } else if (t.address.empty()) {
      t.address = text;
    }
  }
  freeaddrinfo(list);
  if (!refusal.empty()) return Status::InvalidArgument(refusal);
  if (t.address.empty())
    return Status::InvalidArgument("the host \"" + Excerpt(t.host) + "\" has no address");
  *out = t;
  return Status::Ok();
}

}  // namespace taut::server
