#include "server/hashing.h"

#include <openssl/evp.h>
#include <openssl/hmac.h>
#include <openssl/rand.h>
#include <openssl/sha.h>

#include <stdexcept>

namespace taut::server {

std::string ToHex(std::string_view bytes) {
  static constexpr char kDigits[] = "0123456789abcdef";
  std::string out(2 * bytes.size(), '0');
  for (std::size_t i = 0; i < bytes.size(); ++i) {
    const auto b = static_cast<unsigned char>(bytes[i]);
    out[2 * i] = kDigits[b >> 4];
    out[2 * i + 1] = kDigits[b & 15];
  }
  return out;
}

std::string Sha256Hex(std::string_view bytes) {
  unsigned char digest[SHA256_DIGEST_LENGTH];
  SHA256(reinterpret_cast<const unsigned char*>(bytes.data()), bytes.size(), digest);
  return ToHex(std::string_view(reinterpret_cast<const char*>(digest), sizeof digest));
}

std::string HmacSha256Raw(std::string_view key, std::string_view message) {
  unsigned char out[EVP_MAX_MD_SIZE];
  unsigned int len = 0;
  HMAC(EVP_sha256(), key.data(), static_cast<int>(key.size()),
       reinterpret_cast<const unsigned char*>(message.data()), message.size(), out, &len);
  return std::string(reinterpret_cast<const char*>(out), len);
}

std::string HmacSha256Hex(std::string_view key, std::string_view message) {
  return ToHex(HmacSha256Raw(key, message));
}

std::string RandomBytes(std::size_t n) {
  std::string bytes(n, '\0');
  if (RAND_bytes(reinterpret_cast<unsigned char*>(bytes.data()), static_cast<int>(n)) != 1) {
    throw std::runtime_error("OpenSSL RAND_bytes failed: no secure randomness for a token");
  }
  return bytes;
}

std::string RandomHex(std::size_t n) { return ToHex(RandomBytes(n)); }

}  // namespace taut::server
