#include "storage/repository.h"

#include <bit>
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

const char* RoleName(Role role) {
  switch (role) {
    case Role::kRead:
      return "read";
    case Role::kUpload:
      return "upload";
    case Role::kAdmin:
      return "admin";
  }
  return "read";
}

const char* JobStateName(JobState state) {
  switch (state) {
    case JobState::kQueued:
      return "queued";
    case JobState::kRunning:
      return "running";
    case JobState::kDone:
      return "done";
    case JobState::kFailed:
      return "failed";
  }
  return "queued";
}

const char* AlertStateName(AlertState state) {
  switch (state) {
    case AlertState::kOpen:
      return "open";
    case AlertState::kAcknowledged:
      return "acknowledged";
    case AlertState::kResolved:
      return "resolved";
  }
  return "open";
}

std::string EncodeSamples(const std::vector<double>& samples) {
  std::string blob(samples.size() * kBytesPerSample, '\0');
  for (std::size_t i = 0; i < samples.size(); ++i) {
    std::uint32_t bits = std::bit_cast<std::uint32_t>(static_cast<float>(samples[i]));
    for (std::size_t b = 0; b < kBytesPerSample; ++b) {  // little-endian whatever the host order
      blob[i * kBytesPerSample + b] = static_cast<char>((bits >> (8 * b)) & 0xffu);
    }
  }
  return blob;
}

StorageStatus DecodeSamples(std::string_view blob, std::size_t expected_values,
                            std::vector<double>* samples) {
  if (blob.size() != expected_values * kBytesPerSample) {
    return {SQLITE_CORRUPT, "samples blob has " + std::to_string(blob.size()) + " bytes, expected " +
                                std::to_string(expected_values * kBytesPerSample) + " (" +
                                std::to_string(expected_values) + " binary32 values)"};
  }
  std::vector<double> out(expected_values);
  for (std::size_t i = 0; i < expected_values; ++i) {
    std::uint32_t bits = 0;
    for (std::size_t b = 0; b < kBytesPerSample; ++b) {
      bits |= static_cast<std::uint32_t>(static_cast<unsigned char>(blob[i * kBytesPerSample + b]))
              << (8 * b);
    }
    out[i] = static_cast<double>(std::bit_cast<float>(bits));
  }
  *samples = std::move(out);
  return {};
}

StorageStatus Repository::Write(const std::function<StorageStatus()>& body, bool read_committed) {
  fault_step_ = 0;
  return internal::WriteTransaction(db_, body, read_committed);
}

StorageStatus Repository::Fault() {
  if (!fault_hook_) return {};
  const int step = ++fault_step_;
  const int rc = fault_hook_(step);
  if (rc == SQLITE_OK) return {};
  return {rc, "injected fault at step " + std::to_string(step)};
}

}  // namespace taut::storage
