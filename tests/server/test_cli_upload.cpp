// `taut upload` against the real `taut serve` on loopback (both as child
// processes, a real SQLite file): 20 files, one broken, the server killed
// and restarted on the same port in the middle of the run. Every good file
// must be stored exactly once (checked in the database by content hash),
// the broken one reported with the reader's line and column, exit status 1.
// Records are model-generated (model/ambient_synthesis.h) for an invented
// hanger; every wait is bounded.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <sstream>
#include <thread>

#include "model/ambient_synthesis.h"
#include "server/auth.h"
#include "server/cli.h"
#include "server/hashing.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/record_csv.h"
#include "storage/migrations.h"
#include "storage/repository.h"
#include "tests/server/serve_process.h"

// After Eigen: <resolv.h> (pulled in by httplib) defines _res.
#include <httplib.h>

namespace taut::server {
namespace {

using nlohmann::json;
using namespace std::chrono_literals;
using taut::testing::ServeProcess;

std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// Lines of `text` that contain `needle`.
int CountLines(const std::string& text, const std::string& needle) {
  std::istringstream in(text);
  std::string l;
  int n = 0;
  while (std::getline(in, l))
    if (l.find(needle) != std::string::npos) ++n;
  return n;
}

// `taut upload ...` as a child process, stdout and stderr to files.
pid_t StartUpload(const std::vector<std::string>& args, const std::string& out, const std::string& err) {
  const pid_t pid = fork();
  if (pid == 0) {
    const int o = ::open(out.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    const int e = ::open(err.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    dup2(o, STDOUT_FILENO);
    dup2(e, STDERR_FILENO);
    std::vector<char*> argv;
    argv.push_back(const_cast<char*>(TAUT_BINARY_PATH));
    for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
    argv.push_back(nullptr);
    execv(TAUT_BINARY_PATH, argv.data());
    _exit(127);
  }
  return pid;
}

class CliUpload : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() /
           ("taut-upload-" + std::to_string(::getpid()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    std::filesystem::remove_all(dir_);
    std::filesystem::create_directories(dir_);
    db_ = (dir_ / "taut.db").string();
    {
      storage::Database d;
      ASSERT_TRUE(storage::OpenAndMigrate(d, db_).ok());
      storage::Repository repo(d);
      storage::Id org = 0;
      ASSERT_TRUE(repo.CreateOrganisation("Invented gateway works", NowUnixMs(), &org).ok());
      ASSERT_TRUE(IssueToken(repo, org, storage::Role::kAdmin, "gateway", NowUnixMs(), &token_).ok());
    }
    port_ = serve_.Start(db_, (dir_ / "serve.log").string(), 1);
    ASSERT_GT(port_, 0);
    // The invented hanger of examples/oskerton-footbridge-h2.json.
    const std::string member_text = ReadFile(std::string(TAUT_EXAMPLES_DIR) + "/oskerton-footbridge-h2.json");
    ASSERT_TRUE(ParseMember(member_text, &member_, {.require_id = true}).ok());
    httplib::Client c("127.0.0.1", port_);
    c.set_default_headers({{"Authorization", "Bearer " + token_}});
    auto s = c.Post("/v1/structures", R"({"name": "Invented footbridge"})", "application/json");
    ASSERT_TRUE(s && s->status == 201);
    auto m =
        c.Post("/v1/structures/" + std::to_string(json::parse(s->body)["id"].get<long long>()) + "/members",
               member_text, "application/json");
    ASSERT_TRUE(m && m->status == 201);
    member_id_ = std::to_string(json::parse(m->body)["id"].get<long long>());
    token_file_ = (dir_ / "token").string();
    std::ofstream(token_file_) << token_ << "\n";
  }
  void TearDown() override {
    serve_.Kill(SIGKILL);
    if (!HasFailure() && !std::getenv("TAUT_KEEP")) std::filesystem::remove_all(dir_);
  }

  // A record of 12 s at 128 Hz (hanger at 60 kN, seed `seed`) recorded
  // `hours_ago`; returns the CSV text.
  std::string RecordCsv(unsigned seed, int hours_ago) {
    model::ModalParameters truth;
    truth.axial_force_n = 60000;
    model::AmbientSpec spec;
    spec.duration_s = 12.0;
    spec.sample_rate_hz = 128;
    spec.modes = 3;
    spec.seed = seed;
    spec.rms_m_s2 = 0.02;
    spec.elements = 20;
    std::vector<std::string> channels;
    Eigen::MatrixXd a;
    EXPECT_TRUE(
        model::SynthesizeAmbient(member_, model::Direction::kLateral, truth, spec, &channels, &a).ok());
    RecordCsvHeader h;
    h.recorded_at = FormatIsoUtc(NowUnixMs() - hours_ago * 3'600'000LL);
    return FormatRecordCsv(h, channels, spec.sample_rate_hz, a.rows(), [&](std::int64_t i, std::size_t ch) {
      return a(i, static_cast<Eigen::Index>(ch));
    });
  }
  std::vector<std::string> Args() const {
    return {"upload",       "--server", "http://127.0.0.1:" + std::to_string(port_), "--member", member_id_,
            "--token-file", token_file_};
  }

  std::filesystem::path dir_;
  std::string db_, token_, token_file_, member_id_;
  model::Member member_;
  ServeProcess serve_;
  int port_ = 0;
};

TEST_F(CliUpload, TwentyFilesOneBrokenServerRestartedMidRun) {
  const auto& dir = dir_;
  const std::string& db = db_;
  const int port = port_;
  // 20 records, distinct seeds; file 7 has a NaN in line 20 (3 metadata
  // lines, header line 4, rows from line 5).
  std::vector<std::string> files, good_hashes;
  std::string broken_path;
  for (int k = 0; k < 20; ++k) {
    std::string csv = RecordCsv(100 + static_cast<unsigned>(k), 20 - k);
    if (k == 7) {
      std::size_t pos = 0;
      for (int line = 1; line < 20; ++line) pos = csv.find('\n', pos) + 1;
      const std::size_t comma = csv.find(',', pos);
      csv.replace(comma + 1, csv.find(',', comma + 1) - comma - 1, "nan");
    } else {
      good_hashes.push_back(Sha256Hex(csv));
    }
    const std::string path = (dir / ("rec" + std::to_string(k) + ".csv")).string();
    std::ofstream(path, std::ios::binary) << csv;
    files.push_back(path);
    if (k == 7) broken_path = path;
  }
  std::vector<std::string> args = Args();
  args.insert(args.end(), files.begin(), files.end());
  const std::string out = (dir / "upload.out").string(), err = (dir / "upload.err").string();
  const pid_t upload = StartUpload(args, out, err);
  ASSERT_GT(upload, 0);
  // After 5 results: freeze the client, kill the server, let the client
  // run into the outage, restart the server on the same port after 1.5 s.
  const auto deadline = std::chrono::steady_clock::now() + 60s;
  while (CountLines(ReadFile(out), ": ") < 5 && std::chrono::steady_clock::now() < deadline)
    std::this_thread::sleep_for(5ms);
  ::kill(upload, SIGSTOP);
  const int results_before = CountLines(ReadFile(out), ": ");
  serve_.Kill(SIGKILL);
  ::kill(upload, SIGCONT);
  std::this_thread::sleep_for(1500ms);
  ServeProcess again;
  ASSERT_EQ(again.Start(db, (dir / "serve2.log").string(), 1, {}, "127.0.0.1:" + std::to_string(port)), port);
  int status = 0;
  for (int i = 0; i < 1200 && waitpid(upload, &status, WNOHANG) == 0; ++i) std::this_thread::sleep_for(50ms);
  ASSERT_TRUE(WIFEXITED(status)) << "taut upload did not finish within 60 s";
  const std::string stdout_text = ReadFile(out), stderr_text = ReadFile(err);
  EXPECT_EQ(WEXITSTATUS(status), 1) << stdout_text << stderr_text;
  EXPECT_LT(results_before, 20) << "the outage came after the run";
  EXPECT_GE(CountLines(stderr_text, "retrying"), 1) << "the client never saw the outage:\n" << stderr_text;
  EXPECT_EQ(stderr_text.find(token_), std::string::npos) << "the token was printed";
  EXPECT_EQ(stdout_text.find(token_), std::string::npos) << "the token was printed";
  EXPECT_EQ(CountLines(stdout_text, "19 of 20 files accepted"), 1) << stdout_text;
  // The broken file: the reader's message with line and column.
  EXPECT_EQ(CountLines(stdout_text, broken_path + ": refused (400): line 20, column 2"), 1) << stdout_text;
  EXPECT_EQ(CountLines(stdout_text, ", job "), 19) << stdout_text;

  // Every good file stored exactly once (content hash of the upload body).
  sqlite3* h = nullptr;
  ASSERT_EQ(sqlite3_open_v2(db.c_str(), &h, SQLITE_OPEN_READONLY, nullptr), SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(h, "SELECT content_sha256 FROM record", -1, &st, nullptr), SQLITE_OK);
  std::map<std::string, int> stored;
  while (sqlite3_step(st) == SQLITE_ROW) ++stored[reinterpret_cast<const char*>(sqlite3_column_text(st, 0))];
  sqlite3_finalize(st);
  sqlite3_close(h);
  EXPECT_EQ(stored.size(), 19u);
  for (const auto& hash : good_hashes) EXPECT_EQ(stored[hash], 1) << hash;

  // A second run stores nothing new: every good file is a duplicate.
  std::vector<std::string> again_args = args;
  const std::string out2 = (dir / "upload2.out").string();
  const pid_t second = StartUpload(again_args, out2, (dir / "upload2.err").string());
  ASSERT_GT(second, 0);
  for (int i = 0; i < 1200 && waitpid(second, &status, WNOHANG) == 0; ++i) std::this_thread::sleep_for(50ms);
  ASSERT_TRUE(WIFEXITED(status));
  EXPECT_EQ(CountLines(ReadFile(out2), "(duplicate: already stored)"), 19) << ReadFile(out2);
  again.Kill(SIGTERM);
}

// --wait follows the job to its estimate and prints the verdict line (a
// result without a verdict key reads "usable", docs/FORMATS.md 3.4).
TEST_F(CliUpload, WaitPrintsTheVerdictLine) {
  // Sent as a logger writes it (semicolons, decimal commas): the record
  // keeps the reader's notes (GET /v1/records/{id} "reader_notes").
  std::string csv = RecordCsv(7, 1);
  const std::size_t header = csv.find("time_s");
  for (std::size_t i = header; i < csv.size(); ++i)
    csv[i] = csv[i] == ',' ? ';' : csv[i] == '.' ? ',' : csv[i];
  const std::string path = (dir_ / "one.csv").string();
  std::ofstream(path, std::ios::binary) << csv;
  std::vector<std::string> args = Args();
  args.insert(args.end(), {"--wait", "--wait-timeout", "120", path});
  const std::string out = (dir_ / "wait.out").string();
  const pid_t pid = StartUpload(args, out, (dir_ / "wait.err").string());
  ASSERT_GT(pid, 0);
  int status = 0;
  for (int i = 0; i < 2600 && waitpid(pid, &status, WNOHANG) == 0; ++i) std::this_thread::sleep_for(50ms);
  ASSERT_TRUE(WIFEXITED(status)) << "taut upload --wait did not finish within 130 s";
  const std::string text = ReadFile(out);
  EXPECT_EQ(WEXITSTATUS(status), 0) << text << ReadFile((dir_ / "wait.err").string());
  EXPECT_EQ(CountLines(text, path + ": estimate "), 1) << text;
  EXPECT_EQ(CountLines(text, "kN (95 % "), 1) << text;
  EXPECT_EQ(CountLines(text, "; verdict "), 1) << text;
  EXPECT_EQ(CountLines(text, "1 of 1 files accepted"), 1) << text;
  httplib::Client c("127.0.0.1", port_);
  c.set_default_headers({{"Authorization", "Bearer " + token_}});
  auto r = c.Get("/v1/records/1");
  ASSERT_TRUE(r && r->status == 200);
  const json notes = json::parse(r->body)["reader_notes"];
  ASSERT_TRUE(notes.is_array());
  ASSERT_EQ(notes.size(), 1u) << notes.dump();
  EXPECT_EQ(notes[0], "separator ';', decimal comma accepted");
}

TEST(CliUploadArgs, WithoutATokenNothingIsSent) {
  ::unsetenv("TAUT_TOKEN");
  const std::string path = (std::filesystem::temp_directory_path() / "taut-upload-none.csv").string();
  std::ofstream(path) << "time_s,a1\n";
  std::ostringstream out, err;
  const char* argv[] = {"taut", "upload", "--server", "http://127.0.0.1:9", "--member", "1", path.c_str()};
  EXPECT_EQ(Main(7, argv, out, err), 1);
  EXPECT_NE(err.str().find("TAUT_TOKEN"), std::string::npos) << err.str();
  std::filesystem::remove(path);
}

}  // namespace
}  // namespace taut::server
