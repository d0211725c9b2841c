// `echoline report --db` draws a lot's limits from the recipe stored with its runs in the central
// database (by content hash), not from the recipe file at hand, and says when the lot's runs used
// more than one recipe version. A real PostgreSQL server (test fixture) and the real client.
#include <sys/stat.h>

#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <gtest/gtest.h>
#include <pqxx/pqxx>

#include "daemon/central/documents.hpp"
#include "daemon/central/schema.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/central/writer.hpp"
#include "daemon/core/cal_kit.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "tests/support/postgres_server.hpp"
#include "tests/support/process.hpp"

namespace echoline::central {
namespace {

using testing::Outcome;
using testing::PostgresServer;
using testing::TempDir;

std::string read_text(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// The project's windowed whip recipe with another version and resonance window.
std::string recipe_variant(const std::string& version, const std::string& min_mhz, const std::string& max_mhz) {
  std::string text = read_text(testing::source_dir() / "config/recipes/whip915-window.jsonc");
  auto swap = [&](const std::string& from, const std::string& to) {
    const auto at = text.find(from);
    EXPECT_NE(at, std::string::npos) << from;
    if (at != std::string::npos) text.replace(at, from.size(), to);
  };
  swap("\"version\": \"1.0\"", "\"version\": \"" + version + "\"");
  swap("\"resonance_min_hz\": \"905 MHz\"", "\"resonance_min_hz\": \"" + min_mhz + " MHz\"");
  swap("\"resonance_max_hz\": \"925 MHz\"", "\"resonance_max_hz\": \"" + max_mhz + " MHz\"");
  return text;
}

OutgoingRun run_with(const std::string& lot, const std::string& serial, int minute, const core::Recipe& recipe,
                     const std::string& text, bool send_text) {
  OutgoingRun o;
  o.station_seq = minute;
  core::RunResult& r = o.run;
  r.run_id = lot + "-" + serial + "-" + std::to_string(minute);
  r.serial = serial;
  r.lot = lot;
  r.station = "bench-r";
  r.operator_name = "op";
  r.recipe = {recipe.name, recipe.version, recipe.content_hash};
  r.decision_rule = "guarded";
  r.started_utc = fmt::format("2026-12-02T10:{:02}:00.000Z", minute);
  r.ended_utc = fmt::format("2026-12-02T10:{:02}:05.000Z", minute);
  r.verdict = core::Verdict::pass;
  r.metrics.resonance_hz = 912e6 + minute * 0.1e6;
  r.metrics.depth_db = 20;
  for (int i = 0; i < 23; ++i) r.points.push_back({860e6 + i * 5e6, -30.0, 12.0, 11.0, 13.0});
  o.document = run_document(r);
  if (send_text) o.recipe = RecipeText{recipe.content_hash, recipe.name, recipe.version, text};
  return o;
}

bool has(const std::string& html, const std::string& text) { return html.find(text) != std::string::npos; }

class CentralReportRecipe : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    if (PostgresServer::unavailable()) return;
    server_ = new PostgresServer();
    pqxx::connection admin(server_->admin_conninfo());
    migrate(admin);
    server_->psql("CREATE ROLE bench LOGIN PASSWORD 'Bench-Pw-51' IN ROLE echoline_station; "
                  "CREATE ROLE quality LOGIN PASSWORD 'Quality-Pw-52' IN ROLE echoline_reader;");
  }
  static void TearDownTestSuite() {
    delete server_;
    server_ = nullptr;
  }
  void SetUp() override {
    if (!server_) GTEST_SKIP() << *PostgresServer::unavailable();
  }

  // `echoline report --lot LOT --db ... --recipe LOCAL`; the password comes from a libpq password file.
  std::string report(const TempDir& dir, const std::string& lot, const std::filesystem::path& local) {
    const auto pgpass = dir / "pgpass";
    std::ofstream(pgpass) << "127.0.0.1:" << server_->port() << ":echoline:quality:Quality-Pw-52\n";
    ::chmod(pgpass.c_str(), 0600);
    const std::string conninfo =
        "host=127.0.0.1 port=" + std::to_string(server_->port()) + " dbname=echoline user=quality connect_timeout=15";
    const auto out = dir / (lot + ".html");
    const Outcome o = testing::run_to_end({testing::client_binary().string(), "report", "--lot", lot, "--out",
                                           out.string(), "--db", conninfo, "--recipe", local.string()},
                                          {{"PGPASSFILE", pgpass.string()}, {"HOME", dir.path().string()}});
    EXPECT_EQ(o.code, 0) << o.output;
    return read_text(out);
  }

  static inline PostgresServer* server_ = nullptr;
};

TEST_F(CentralReportRecipe, LimitsComeFromTheRunsStoredRecipeAndTwoVersionsAreNamed) {
  TempDir dir;
  const std::string v1_text = recipe_variant("1.0", "905", "925");
  const std::string v2_text = recipe_variant("1.1", "903", "921");
  const std::string local_text = recipe_variant("9.9", "871", "877");
  const core::Recipe v1 = core::parse_recipe(v1_text, "v1.jsonc");
  const core::Recipe v2 = core::parse_recipe(v2_text, "v2.jsonc");
  const core::Recipe local = core::parse_recipe(local_text, "local.jsonc");
  ASSERT_NE(v1.content_hash, v2.content_hash);
  const auto local_file = dir / "local.jsonc";
  std::ofstream(local_file) << local_text;

  // Lot LOT-R: three units under version 1.0, then a retest and two more units under 1.1.
  // Lot LOT-S: runs whose recipe text never reached the central database.
  std::vector<OutgoingRun> runs;
  for (int i = 0; i < 3; ++i) runs.push_back(run_with("LOT-R", "U" + std::to_string(i), i, v1, v1_text, true));
  runs.push_back(run_with("LOT-R", "U0", 10, v2, v2_text, true));
  for (int i = 3; i < 5; ++i) runs.push_back(run_with("LOT-R", "U" + std::to_string(i), 10 + i, v2, v2_text, true));
  const core::Recipe v3 = core::parse_recipe(recipe_variant("1.2", "907", "919"), "v3.jsonc");
  runs.push_back(run_with("LOT-S", "S1", 20, v3, "", false));
  CentralWriter w(settings_from_connection_string(server_->tcp_conninfo("bench", "Bench-Pw-51")).value(),
                  "00ab11cd22ef3344", kit_document(core::builtin_conservative_kit()));
  auto sent = w.send(runs);
  ASSERT_TRUE(sent.ok()) << sent.error().message;

  const std::string html = report(dir, "LOT-R", local_file);
  // The lines are those of 1.1, the recipe of the lot's latest run, as stored with the runs.
  EXPECT_TRUE(has(html, "LSL 903.0")) << "resonance window of the stored recipe 1.1 not drawn";
  EXPECT_TRUE(has(html, "USL 921.0"));
  EXPECT_FALSE(has(html, "LSL 871.0")) << "the local recipe file's window was drawn";
  EXPECT_FALSE(has(html, "LSL 905.0"));
  // Both versions are named, with their runs and units, above everything else.
  EXPECT_TRUE(has(html, "The runs of this lot used 2 recipe versions")) << html.substr(0, 3000);
  EXPECT_TRUE(has(html, "whip915-window v1.0 (" + v1.content_hash.substr(0, 12) + "): 3 runs, latest run of 2 units"));
  EXPECT_TRUE(has(html, "whip915-window v1.1 (" + v2.content_hash.substr(0, 12) + "): 3 runs, latest run of 3 units"));
  EXPECT_TRUE(has(html, "<td>" + v2.content_hash + "</td>"));
  EXPECT_TRUE(has(html, "recipe whip915-window v1.1 (" + v2.content_hash.substr(0, 12) + "), as stored with the runs"));
  EXPECT_FALSE(has(html, "did NOT judge these runs"));

  // Without the stored text the local file stands in, and the report says it did not judge them.
  const std::string fallback = report(dir, "LOT-S", local_file);
  EXPECT_TRUE(has(fallback, "LSL 871.0"));
  EXPECT_TRUE(has(fallback, "which did NOT judge these runs")) << fallback.substr(0, 3000);
  EXPECT_TRUE(has(fallback, "its text is not stored with the runs"));
  EXPECT_FALSE(has(fallback, "recipe versions:"));
}

}  // namespace
}  // namespace echoline::central
