// Database connections of the HTTP threads (internal to server/).
//
// Connections are opened on demand and returned after each request, so at
// most as many are open as requests run at once; each is used by one thread
// at a time (storage/database.h).
#pragma once

#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "storage/database.h"

namespace taut::server {

class ConnectionPool {
 public:
  explicit ConnectionPool(std::string path) : path_(std::move(path)) {}

  class Lease {
   public:
    Lease(ConnectionPool* pool, std::unique_ptr<storage::Database> db) : pool_(pool), db_(std::move(db)) {}
    ~Lease() {
      if (db_) pool_->Return(std::move(db_));
    }
    Lease(Lease&&) = default;
    storage::Database& db() { return *db_; }

   private:
    ConnectionPool* pool_;  // not owned; outlives the lease
    std::unique_ptr<storage::Database> db_;
  };

  // An idle connection, or a new one. Throws ApiError 503 when the
  // database cannot be opened.
  Lease Acquire();

 private:
  void Return(std::unique_ptr<storage::Database> db) {
    std::lock_guard<std::mutex> lock(mu_);
    idle_.push_back(std::move(db));
  }

  std::string path_;
  std::mutex mu_;
  std::vector<std::unique_ptr<storage::Database>> idle_;
};

}  // namespace taut::server
