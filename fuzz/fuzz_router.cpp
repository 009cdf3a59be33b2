// libFuzzer: the route table (server/http_router.h) on any method and path:
// matching must never throw (ids of 1..18 digits only), and a match has as
// many captured ids as its pattern has "{...}" segments.
#include <httplib.h>

#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "server/http_router.h"

namespace {

void Nop(taut::server::Call&) {}

const taut::server::Router& Table() {
  static const taut::server::Router router = [] {
    taut::server::Router r;
    using taut::storage::Role;
    for (const char* p :
         {"/v1/health", "/v1/structures", "/v1/structures/{id}", "/v1/structures/{id}/members",
          "/v1/members/{id}/versions/{version}", "/v1/members/{id}/records", "/", "/ui/**"}) {
      r.Add("GET", p, Role::kRead, Nop);
      r.Add("POST", p, Role::kAdmin, Nop);
    }
    return r;
  }();
  return router;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string input(reinterpret_cast<const char*>(data), size);
  const auto space = input.find(' ');
  httplib::Request req;
  req.method = input.substr(0, space);
  req.path = space == std::string::npos ? "/" : input.substr(space + 1);
  std::vector<taut::storage::Id> ids;
  std::string allow;
  const taut::server::Route* r = Table().Find(req, &ids, &allow);
  if (r) {
    std::size_t captures = 0;
    for (const auto& s : r->segments) captures += !s.empty() && s.front() == '{';
    if (ids.size() != captures) std::abort();
    for (auto id : ids) {
      if (id < 0) std::abort();
    }
  }
  return 0;
}
