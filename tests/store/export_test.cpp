// Exports: RFC 4180 CSV and JSON read back equal to the stored values; Touchstone says phase is unknown.
#include "daemon/store/export.hpp"

#include <gtest/gtest.h>

#include <charconv>
#include <cmath>
#include <fstream>
#include <limits>
#include <nlohmann/json.hpp>
#include <sstream>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

double parse_double(const std::string& s) {
  if (s == "inf") return std::numeric_limits<double>::infinity();
  double v = 0;
  auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
  EXPECT_TRUE(ec == std::errc() && p == s.data() + s.size()) << "not a number: " << s;
  return v;
}

class ExportTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testdata::temp_dir("export");
    auto s = RunStore::open(dir_ / "station.db");
    ASSERT_TRUE(s.ok());
    store_ = std::move(*s);
    auto a = testdata::make_run("WH915A-0001", "L7", 1, 915e6);
    a.reason = "has, a comma and \"quotes\"\nand a line break";
    a.points[7].return_loss_best_db = std::numeric_limits<double>::infinity();
    a.metrics.resonance_low_hz = 913.5e6;    // the guarded window around the resonance
    a.metrics.resonance_high_hz = 916.25e6;
    auto b = testdata::make_run("WH915A-0002", "L7", 2, 931.7e6, core::Verdict::fail, core::FailureClass::tuned_high);
    b.temperature_c.reset();
    ASSERT_TRUE(store_->save_run(a).ok());
    ASSERT_TRUE(store_->save_run(b).ok());
    auto runs = store_->lot_runs("L7", true);
    ASSERT_TRUE(runs.ok());
    runs_ = *runs;
  }
  void TearDown() override { store_.reset(); std::filesystem::remove_all(dir_); }
  std::filesystem::path dir_;
  std::unique_ptr<RunStore> store_;
  std::vector<core::RunResult> runs_;
};

TEST(Csv, FieldsAreQuotedPerRfc4180) {
  // RFC 4180 §2.6: fields with commas, quotes or line breaks are enclosed in double quotes;
  // §2.7: a quote inside is escaped by doubling it.
  EXPECT_EQ(csv_field("plain"), "plain");
  EXPECT_EQ(csv_field("a,b"), "\"a,b\"");
  EXPECT_EQ(csv_field("say \"hi\""), "\"say \"\"hi\"\"\"");
  EXPECT_EQ(csv_field("two\r\nlines"), "\"two\r\nlines\"");
  auto rows = parse_csv("a,\"b,c\",\"d\"\"e\"\r\n\"x\ny\",,z\r\n");
  ASSERT_TRUE(rows.ok());
  ASSERT_EQ(rows->size(), 2u);
  EXPECT_EQ((*rows)[0], (std::vector<std::string>{"a", "b,c", "d\"e"}));
  EXPECT_EQ((*rows)[1], (std::vector<std::string>{"x\ny", "", "z"}));
  auto bad = parse_csv("a,\"unterminated\r\n");
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.error().message.find("unterminated"), std::string::npos);
  auto stray = parse_csv("a,b\"c\r\n");
  ASSERT_FALSE(stray.ok());
  EXPECT_NE(stray.error().message.find("line 1, column 4"), std::string::npos);
}

TEST_F(ExportTest, PointsCsvRoundTripsToStoredValues) {
  const auto text = csv_points(runs_);
  auto rows = parse_csv(text);
  ASSERT_TRUE(rows.ok()) << rows.error().message;
  ASSERT_EQ(rows->size(), 1u + 2 * 201);
  EXPECT_EQ((*rows)[0], (std::vector<std::string>{"run_id", "serial", "lot", "recipe", "verdict", "frequency_hz", "raw_dbm",
                                                  "return_loss_db", "return_loss_worst_db", "return_loss_best_db",
                                                  "offset_raw_dbm"}));
  std::size_t row = 1;
  for (const auto& r : runs_) {
    for (const auto& p : r.points) {
      const auto& f = (*rows)[row++];
      ASSERT_EQ(f.size(), 11u);
      EXPECT_EQ(f[0], r.run_id);
      EXPECT_EQ(f[4], core::to_string(r.verdict));
      EXPECT_EQ(parse_double(f[5]), p.frequency_hz);   // exact: shortest round-trip formatting
      EXPECT_EQ(parse_double(f[6]), p.raw_dbm);
      EXPECT_EQ(parse_double(f[7]), p.return_loss_db);
      EXPECT_EQ(parse_double(f[8]), p.return_loss_worst_db);
      EXPECT_EQ(parse_double(f[9]), p.return_loss_best_db);
      EXPECT_EQ(f[10], "");   // read once: no offset-line reading
    }
  }
}

TEST_F(ExportTest, RunsCsvRoundTripsReasonAndMetrics) {
  auto rows = parse_csv(csv_runs(runs_));
  ASSERT_TRUE(rows.ok());
  ASSERT_EQ(rows->size(), 3u);
  EXPECT_EQ((*rows)[0], kRunCsvColumns);
  auto col = [&](const char* name) {
    return static_cast<std::size_t>(std::find(kRunCsvColumns.begin(), kRunCsvColumns.end(), name) - kRunCsvColumns.begin());
  };
  EXPECT_EQ((*rows)[1][col("reason")], runs_[0].reason);
  EXPECT_EQ(parse_double((*rows)[1][col("resonance_hz")]), *runs_[0].metrics.resonance_hz);
  EXPECT_EQ(parse_double((*rows)[1][col("resonance_low_hz")]), 913.5e6);
  EXPECT_EQ(parse_double((*rows)[1][col("resonance_high_hz")]), 916.25e6);
  EXPECT_EQ((*rows)[2][col("resonance_low_hz")], "");   // b has no window: empty cell
  EXPECT_EQ((*rows)[2][col("temperature_c")], "");
  EXPECT_EQ((*rows)[2][col("failure_class")], "tuned-high");
  EXPECT_EQ((*rows)[2][col("trim_text")], runs_[1].trim->text);
  EXPECT_EQ((*rows)[2][col("points")], "201");
}

// A run read twice (the offset pair) carries its second raw reading as a sixth point column in
// JSON and the last CSV column; both read back exactly.
TEST_F(ExportTest, TheOffsetLineReadingIsExportedAndReadBack) {
  core::RunResult run = runs_[0];
  for (std::size_t i = 0; i < run.points.size(); ++i) run.points[i].offset_raw_dbm = -41.5 + 0.001 * static_cast<double>(i);
  const auto doc = nlohmann::json::parse(json_run(run));
  const auto& j = doc.contains("run") ? doc.at("run") : doc.at("runs").at(0);
  ASSERT_EQ(j.at("point_columns").size(), 6u);
  EXPECT_EQ(j.at("point_columns").at(5), "offset_raw_dbm");
  auto back = run_from_json(j);
  ASSERT_TRUE(back.ok()) << back.error().message;
  ASSERT_EQ(back->points.size(), run.points.size());
  for (std::size_t i = 0; i < run.points.size(); ++i) EXPECT_EQ(back->points[i].offset_raw_dbm, run.points[i].offset_raw_dbm);
  auto rows = parse_csv(csv_points({run}));
  ASSERT_TRUE(rows.ok());
  EXPECT_EQ(parse_double((*rows)[8][10]), run.points[7].offset_raw_dbm);
  // A run read once keeps the five columns.
  EXPECT_EQ(nlohmann::json::parse(json_run(runs_[1])).dump().find("offset_raw_dbm"), std::string::npos);
}

TEST_F(ExportTest, JsonLotDocumentRoundTripsEveryRun) {
  const auto doc = nlohmann::json::parse(json_lot("L7", runs_));
  EXPECT_EQ(doc.at("kind"), "lot");
  EXPECT_EQ(doc.at("key"), "L7");
  ASSERT_EQ(doc.at("runs").size(), 2u);
  for (std::size_t k = 0; k < runs_.size(); ++k) {
    auto back = run_from_json(doc.at("runs").at(k));
    ASSERT_TRUE(back.ok()) << back.error().message;
    const auto& a = runs_[k];
    const auto& b = *back;
    EXPECT_EQ(b.run_id, a.run_id);
    EXPECT_EQ(b.reason, a.reason);
    EXPECT_EQ(b.instruments, a.instruments);
    EXPECT_EQ(b.temperature_c, a.temperature_c);
    EXPECT_EQ(b.verdict, a.verdict);
    EXPECT_EQ(b.failure_class, a.failure_class);
    EXPECT_EQ(b.metrics.resonance_hz, a.metrics.resonance_hz);
    EXPECT_EQ(b.metrics.resonance_low_hz, a.metrics.resonance_low_hz);
    EXPECT_EQ(b.metrics.resonance_high_hz, a.metrics.resonance_high_hz);
    EXPECT_EQ(b.trim.has_value(), a.trim.has_value());
    ASSERT_EQ(b.points.size(), a.points.size());
    for (std::size_t i = 0; i < a.points.size(); ++i) {
      EXPECT_EQ(b.points[i].frequency_hz, a.points[i].frequency_hz);
      EXPECT_EQ(b.points[i].return_loss_db, a.points[i].return_loss_db);
      EXPECT_EQ(b.points[i].return_loss_best_db, a.points[i].return_loss_best_db);   // null <-> +inf
    }
  }
  EXPECT_TRUE(doc.at("runs").at(0).at("points").at(7).at(4).is_null());
  EXPECT_EQ(nlohmann::json::parse(json_serial("WH915A-0002", {runs_[1]})).at("runs").size(), 1u);
  EXPECT_EQ(nlohmann::json::parse(json_run(runs_[0])).at("kind"), "run");
}

TEST_F(ExportTest, TouchstoneIsHonestAboutPhase) {
  const auto text = touchstone_s1p(runs_[0]);
  std::istringstream in(text);
  std::string line;
  int data = 0;
  bool option_seen = false, phase_note = false;
  while (std::getline(in, line)) {
    if (line.rfind("!", 0) == 0) {   // Touchstone: '!' starts a comment
      phase_note |= line.find("phase unknown, written as 0") != std::string::npos;
      continue;
    }
    if (line.rfind("#", 0) == 0) {
      EXPECT_EQ(line, "# HZ S DB R 50");   // option line: Hz, S-parameters, dB/angle, 50 ohm
      option_seen = true;
      continue;
    }
    std::istringstream f(line);
    std::string hz, db, ang;
    f >> hz >> db >> ang;
    EXPECT_EQ(parse_double(hz), runs_[0].points[data].frequency_hz);
    EXPECT_EQ(parse_double(db), -runs_[0].points[data].return_loss_db);   // S11 dB = -RL (RL = -20 log10|Γ|, IEC 61580-6)
    EXPECT_EQ(ang, "0");
    ++data;
  }
  EXPECT_TRUE(option_seen);
  EXPECT_TRUE(phase_note);
  EXPECT_EQ(data, 201);
  // The reason's line break must not leak out of a comment line: serial etc. only, no reason.
  EXPECT_EQ(text.find("line break"), std::string::npos);
}

TEST_F(ExportTest, WriteTextFileReplacesAtomicallyAndNamesTheFileOnError) {
  const auto file = dir_ / (safe_file_stem(runs_[0].serial) + ".csv");
  ASSERT_TRUE(write_text_file(file, "one").ok());
  ASSERT_TRUE(write_text_file(file, csv_points(runs_)).ok());
  std::ifstream in(file, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  EXPECT_EQ(ss.str(), csv_points(runs_));
  EXPECT_FALSE(std::filesystem::exists(file.string() + ".tmp"));
  auto bad = write_text_file(dir_ / "no-such-folder" / "x.csv", "x");
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.error().kind, ErrorKind::io);
  EXPECT_NE(bad.error().message.find("no-such-folder/x.csv"), std::string::npos);
}

}  // namespace
}  // namespace echoline::store
