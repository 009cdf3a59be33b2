// `taut report` on the kind of database `taut demo` makes (two invented
// structures, ten members, records identified through the service): the
// PDF printed by headless Chromium has the cover, the portfolio and method
// page, the references and sign-off page and one sheet per member, and the
// text poppler's pdftotext reads back from each sheet names the member and
// its latest force and 95 % interval as stored in the database (the
// reference: the estimate rows, formatted to 0.1 kN as the report says).
// Pages are rendered to PNG (pdftoppm) under <build>/test-artifacts/ui/.
// Skips only when chromium is not installed, as the other browser tests.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "storage/repository.h"
#include "tests/ui/webdriver.h"

namespace taut::server {
namespace {

std::string Slurp(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

std::string Kn1(double n) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f", n / 1000.0);
  std::string s = buf;
  return s[0] == '-' ? "\xE2\x88\x92" + s.substr(1) : s;  // the report prints U+2212
}

TEST(InspectionReport, TheDemoDatabaseGivesAPdfWithASheetPerMemberNamingItsForceAndInterval) {
  if (!taut::testing::HaveChromium()) GTEST_SKIP() << "SKIPPED: chromium not installed";
  const std::filesystem::path dir =
      std::filesystem::temp_directory_path() / ("taut-report-" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const std::filesystem::path artifacts = TAUT_UI_ARTIFACTS_DIR;
  std::filesystem::create_directories(artifacts);
  const std::string db_path = (dir / "demo.db").string();
  const std::string taut = TAUT_BINARY_PATH;
  ASSERT_EQ(std::system((taut + " demo --days 2 --per-day 1 --record-length 30 --db " + db_path + " > " +
                         (dir / "demo.log").string() + " 2>&1")
                            .c_str()),
            0)
      << Slurp((dir / "demo.log").string());

  // What the report must show, from the database.
  storage::Database db;
  ASSERT_TRUE(db.Open(db_path).ok());
  std::string org_text;
  ASSERT_TRUE(db.QueryText("SELECT min(id) FROM organisation", &org_text).ok());
  const storage::Id org = std::stoll(org_text);
  storage::Repository repo(db);
  std::vector<storage::Structure> structures;
  ASSERT_TRUE(repo.ListStructures(org, &structures).ok());
  ASSERT_EQ(structures.size(), 2u);
  const storage::Structure& st = structures.front();
  std::vector<storage::Member> members;
  ASSERT_TRUE(repo.ListMembers(org, st.id, &members).ok());
  ASSERT_EQ(members.size(), 6u) << "the demo's market hall has six tie-rods";

  const std::string out = (dir / "out").string();
  ASSERT_EQ(std::system((taut + " report --db " + db_path + " --structure " + std::to_string(st.id) +
                         " --author 'A. Engineer (invented)' --out " + out + " > " +
                         (dir / "report.log").string() + " 2>&1")
                            .c_str()),
            0)
      << Slurp((dir / "report.log").string());
  const std::string pdf = out + "/inspection-report-" + std::to_string(st.id) + ".pdf";
  ASSERT_TRUE(std::filesystem::exists(pdf));
  ASSERT_EQ(std::system(("pdftotext -layout " + pdf + " " + (dir / "report.txt").string()).c_str()), 0)
      << "pdftotext (poppler-utils, deploy/install-deps.sh)";
  std::string text = Slurp((dir / "report.txt").string());
  for (std::size_t p; (p = text.find("\xC2\xA0")) != std::string::npos;)
    text.replace(p, 2, " ");  // no-break spaces
  std::vector<std::string> pages;
  for (std::size_t start = 0, end; (end = text.find('\f', start)) != std::string::npos; start = end + 1) {
    pages.push_back(text.substr(start, end - start));
  }
  // Cover, portfolio and method, references and sign-off, then a sheet per member.
  EXPECT_EQ(pages.size(), 3 + members.size()) << text.substr(0, 2000);
  ASSERT_FALSE(pages.empty());
  EXPECT_NE(pages[0].find(st.name), std::string::npos);
  EXPECT_NE(pages[0].find("A. Engineer (invented)"), std::string::npos);
  EXPECT_NE(pages[0].find("Standing notice"), std::string::npos);
  for (const auto& m : members) {
    storage::Estimate e;
    ASSERT_TRUE(repo.LatestEstimate(org, m.id, &e).ok());
    const std::string force = Kn1(e.axial_force_n) + " kN";
    const std::string interval = Kn1(e.force_ci95_low_n) + " to " + Kn1(e.force_ci95_high_n) + " kN";
    int sheets = 0;
    for (std::size_t i = 3; i < pages.size(); ++i) {
      if (pages[i].find("Member " + m.external_id) == std::string::npos) continue;
      ++sheets;
      EXPECT_NE(pages[i].find(force), std::string::npos) << m.external_id << ": " << force;
      EXPECT_NE(pages[i].find(interval), std::string::npos) << m.external_id << ": " << interval;
    }
    EXPECT_EQ(sheets, 1) << m.external_id << " has " << sheets << " sheet pages";
  }
  // Page images for the reviewer (cover and the first member sheet).
  std::system(("pdftoppm -r 60 -png -f 1 -l 4 " + pdf + " " + (artifacts / "report-page").string()).c_str());
  // An unknown structure is an error with exit code 1.
  EXPECT_NE(
      std::system(
          (taut + " report --db " + db_path + " --structure 999 --out " + out + " > /dev/null 2>&1").c_str()),
      0);
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace taut::server
