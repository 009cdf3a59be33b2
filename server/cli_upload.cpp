// `taut upload`: records from the field to a taut service, as a gateway
// sends them (from cron or by hand).
//
//   taut upload --server URL --member ID [--token-file F] [--wait]
//               [--retries N] [--wait-timeout S] FILE...
//
// - The token comes from the TAUT_TOKEN environment variable or the first
//   line of --token-file; it is never printed.
// - One Idempotency-Key per file from its content ("sha256-<hex>" of the
//   bytes): a retry after a lost answer, or a second run of the same cron
//   job, stores nothing twice (docs/API.md: the same key and content answer
//   200 with the original ids, "duplicate": true).
// - Network errors and the answers 429, 502, 503 and 504 are retried with
//   exponential back-off (kFirstBackoff doubling up to kMaxBackoff, at most
//   --retries retries per file); any other 4xx is the file's own fault (the
//   reader's message names line and column) and is not retried.
// - One result line per file; on a terminal a progress bar on stderr.
// - --wait follows every accepted file's job to its estimate and prints the
//   verdict line (docs/FORMATS.md section 3.4; a result without a verdict
//   is "usable").
// - Exit 0 only when every file was accepted (and, with --wait, every job
//   ended with an estimate); 1 otherwise; 2 for a malformed command line.
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <ostream>
#include <sstream>
#include <thread>

#include "server/cli.h"
#include "server/hashing.h"

// After Eigen (through cli.h): <resolv.h> (pulled in by httplib) defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;

constexpr std::chrono::milliseconds kFirstBackoff{250};
constexpr std::chrono::milliseconds kMaxBackoff{8000};
constexpr int kDefaultRetries = 8;  // 0.25 + 0.5 + ... + 8 + 8: about 24 s of outage bridged
constexpr int kConnectTimeout_s = 5;
constexpr int kReadTimeout_s = 120;  // a large record is parsed and stored before the answer
constexpr double kJobPoll_s = 0.25;

struct UploadOptions {
  std::string server;
  std::string member;
  std::string token_file;
  std::vector<std::string> files;
  bool wait = false;
  int retries = kDefaultRetries;
  double wait_timeout_s = 600.0;
};

// What happened to one file.
struct FileResult {
  bool accepted = false;
  long long record_id = 0, job_id = 0;
  std::string line;  // the result line, without the file name
};

bool Retryable(int status) { return status == 429 || status == 502 || status == 503 || status == 504; }

std::string ErrorMessage(const std::string& body) {
  try {
    const json j = json::parse(body);
    return j.at("error").at("message").get<std::string>();
  } catch (const std::exception&) {
    return body.substr(0, 200);
  }
}

class Uploader {
 public:
  Uploader(const UploadOptions& o, std::string token) : o_(o), client_(o.server) {
    client_.set_connection_timeout(kConnectTimeout_s, 0);
    client_.set_read_timeout(kReadTimeout_s, 0);
    client_.set_write_timeout(kReadTimeout_s, 0);
    client_.set_default_headers({{"Authorization", "Bearer " + token}});
  }

  bool valid() const { return client_.is_valid(); }

  FileResult Upload(const std::string& path, std::ostream& log) {
    FileResult r;
    std::ifstream in(path, std::ios::binary);
    if (!in) {
      r.line = "cannot read the file";
      return r;
    }
    std::ostringstream text;
    text << in.rdbuf();
    const std::string body = text.str();
    const httplib::Headers headers = {{"Idempotency-Key", "sha256-" + Sha256Hex(body)}};
    const std::string route = "/v1/members/" + o_.member + "/records";
    auto backoff = kFirstBackoff;
    bool retried = false;
    for (int attempt = 0;; ++attempt) {
      auto res = client_.Post(route, headers, body, "text/csv");
      std::string failure;
      if (!res) {
        failure = "network: " + httplib::to_string(res.error());
      } else if (res->status == 200 || res->status == 202) {
        try {
          const json j = json::parse(res->body);
          r.record_id = j.at("record_id").get<long long>();
          r.job_id = j.at("job_id").get<long long>();
          r.accepted = true;
          const bool duplicate = j.value("duplicate", false);
          r.line = "record " + std::to_string(r.record_id) + ", job " + std::to_string(r.job_id);
          if (duplicate)
            r.line += retried ? " (stored by an earlier attempt)" : " (duplicate: already stored)";
          if (j.contains("record_cautions"))
            for (const auto& c : j["record_cautions"]) r.line += "; caution " + c.value("code", "");
        } catch (const std::exception& e) {
          r.line = std::string("unexpected answer: ") + e.what();
        }
        return r;
      } else if (!Retryable(res->status)) {
        r.line = "refused (" + std::to_string(res->status) + "): " + ErrorMessage(res->body);
        return r;
      } else {
        failure = "HTTP " + std::to_string(res->status) + ": " + ErrorMessage(res->body);
      }
      if (attempt >= o_.retries) {
        r.line = "not sent after " + std::to_string(attempt + 1) + " attempts: " + failure;
        return r;
      }
      log << "taut upload: " << path << ": " << failure << "; retrying in " << backoff.count() << " ms\n";
      std::this_thread::sleep_for(backoff);
      backoff = std::min(kMaxBackoff, backoff * 2);
      retried = true;
    }
  }

  // Follows the job to its end; the verdict line, or why there is none.
  bool Follow(const FileResult& f, std::string* line) {
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(o_.wait_timeout_s);
    auto backoff = kFirstBackoff;
    for (;;) {
      auto res = client_.Get("/v1/jobs/" + std::to_string(f.job_id));
      if (res && res->status == 200) {
        const json j = json::parse(res->body, nullptr, false);
        const std::string state = j.is_object() ? j.value("state", "") : "";
        if (state == "failed") {
          *line = "job " + std::to_string(f.job_id) + " failed: " + j.value("failure_reason", "");
          return false;
        }
        if (state == "done") break;
        backoff = kFirstBackoff;
      } else if (res && !Retryable(res->status)) {
        *line = "job " + std::to_string(f.job_id) + ": HTTP " + std::to_string(res->status);
        return false;
      }
      if (std::chrono::steady_clock::now() > deadline) {
        *line = "job " + std::to_string(f.job_id) + " not done within " + std::to_string(o_.wait_timeout_s) +
                " s";
        return false;
      }
      std::this_thread::sleep_for(res ? std::chrono::duration<double>(kJobPoll_s) : backoff);
      if (!res) backoff = std::min(kMaxBackoff, backoff * 2);
    }
    auto res = client_.Get("/v1/records/" + std::to_string(f.record_id) + "/estimate");
    if (!res || res->status != 200) {
      *line = "estimate of record " + std::to_string(f.record_id) + ": " +
              (res ? "HTTP " + std::to_string(res->status) : httplib::to_string(res.error()));
      return false;
    }
    const json e = json::parse(res->body, nullptr, false);
    const json result = e.is_object() ? e.value("result", json::object()) : json::object();
    std::ostringstream o;
    o << "estimate " << (e.is_object() ? e.value("id", 0LL) : 0LL);
    if (result.contains("axial_force_n") && result["axial_force_n"].contains("value")) {
      const auto& n = result["axial_force_n"];
      o.precision(4);
      o << ": N = " << n["value"].get<double>() / 1000.0 << " kN";
      if (n.contains("ci95") && n["ci95"].is_array() && n["ci95"].size() == 2 && n["ci95"][0].is_number() &&
          n["ci95"][1].is_number())
        o << " (95 % " << n["ci95"][0].get<double>() / 1000.0 << ".." << n["ci95"][1].get<double>() / 1000.0
          << " kN)";
    }
    // A result without a verdict (written before verdicts existed) is usable
    // (docs/FORMATS.md section 3.4).
    std::string code = "usable", summary = "Usable.";
    if (result.contains("verdict") && result["verdict"].is_object()) {
      code = result["verdict"].value("code", code);
      summary = result["verdict"].value("summary", summary);
    }
    o << "; verdict " << code << ": " << summary;
    *line = o.str();
    return true;
  }

 private:
  const UploadOptions& o_;
  httplib::Client client_;
};

// "[#####.....] 5/20" on a terminal's stderr, redrawn in place.
void Progress(std::ostream& err, std::size_t done, std::size_t total) {
  constexpr std::size_t kWidth = 30;
  const std::size_t filled = total == 0 ? kWidth : done * kWidth / total;
  err << "\r[" << std::string(filled, '#') << std::string(kWidth - filled, '.') << "] " << done << "/"
      << total << std::flush;
}

int RunUpload(const UploadOptions& o, std::ostream& out, std::ostream& err) {
  std::string token;
  if (!o.token_file.empty()) {
    std::ifstream in(o.token_file);
    if (!in || !std::getline(in, token)) {
      err << "taut upload: --token-file " << o.token_file << ": cannot read a token from it\n";
      return 1;
    }
  } else if (const char* t = std::getenv("TAUT_TOKEN")) {
    token = t;
  }
  while (!token.empty() && (token.back() == '\r' || token.back() == ' ' || token.back() == '\n'))
    token.pop_back();
  if (token.empty()) {
    err << "taut upload: no token: set TAUT_TOKEN or give --token-file\n";
    return 1;
  }
  if (o.member.empty() || o.member.find_first_not_of("0123456789") != std::string::npos) {
    err << "taut upload: --member \"" << o.member << "\" must be the member's numeric id\n";
    return 2;
  }
  Uploader up(o, token);
  if (!up.valid()) {
    err << "taut upload: --server \"" << o.server << "\": expected http://HOST:PORT or https://HOST:PORT\n";
    return 2;
  }
  // A progress bar only where a person watches: stderr is a terminal and
  // is the process's own stderr (not a test's capture).
  const bool tty = &err == &std::cerr && ::isatty(STDERR_FILENO) == 1;
  std::vector<FileResult> results(o.files.size());
  std::size_t accepted = 0;
  for (std::size_t i = 0; i < o.files.size(); ++i) {
    if (tty) Progress(err, i, o.files.size());
    std::ostringstream log;
    results[i] = up.Upload(o.files[i], log);
    if (tty) err << "\r\033[K";  // clear the bar before lines of text
    err << log.str();
    out << o.files[i] << ": " << results[i].line << "\n" << std::flush;
    if (results[i].accepted) ++accepted;
  }
  if (tty) Progress(err, o.files.size(), o.files.size()), err << "\n";
  bool all_done = true;
  if (o.wait) {
    for (std::size_t i = 0; i < o.files.size(); ++i) {
      if (!results[i].accepted) continue;
      std::string line;
      all_done = up.Follow(results[i], &line) && all_done;
      out << o.files[i] << ": " << line << "\n" << std::flush;
    }
  }
  out << accepted << " of " << o.files.size() << " files accepted\n";
  return accepted == o.files.size() && all_done ? 0 : 1;
}

}  // namespace

void RegisterUploadCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<UploadOptions>();
  CLI::App* cmd = app.add_subcommand(
      "upload", "Send record files to a taut service (token from TAUT_TOKEN or --token-file; never printed)");
  cmd->add_option("--server", o->server, "the service's base URL, e.g. http://10.0.0.5:8080")->required();
  cmd->add_option("--member", o->member, "the member's numeric id in the service")->required();
  cmd->add_option("--token-file", o->token_file,
                  "file whose first line is the access token (else TAUT_TOKEN)")
      ->check(CLI::ExistingFile);
  cmd->add_flag("--wait", o->wait, "follow every job to its estimate and print the verdict line");
  cmd->add_option("--retries", o->retries, "retries per file on network errors and 503 (default 8)")
      ->check(CLI::Range(0, 100));
  cmd->add_option("--wait-timeout", o->wait_timeout_s,
                  "seconds to wait for each job with --wait (default 600)")
      ->check(CLI::Range(1.0, 86400.0));
  cmd->add_option("files", o->files, "record files (CSV, docs/FORMATS.md section 2)")->required();
  cmd->callback([o, ctx] { ctx->exit_code = RunUpload(*o, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
