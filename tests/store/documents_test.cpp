// Export documents from a real store file: formats and media types, the Touchstone header, and
// clear refusals for a bad format, a Touchstone file of many runs or of a run without values.
#include "daemon/store/documents.hpp"

#include <gtest/gtest.h>

#include <limits>

#include "daemon/store/export.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using testdata::make_run;

class DocumentsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testdata::temp_dir("documents");
    auto s = RunStore::open(dir_ / "station.db");
    ASSERT_TRUE(s.ok()) << s.error().message;
    store_ = std::move(*s);
    good_ = make_run("WH915A-0001", "L1", 0, 915e6);
    good_.software = "echolined 0.2.0 (gabc1234)";
    ASSERT_TRUE(store_->save_run(good_).ok());
    aborted_ = make_run("WH915A-0002", "L1", 1, 915e6, core::Verdict::aborted);
    aborted_.reason = "receiver timed out";
    for (auto& p : aborted_.points) p.return_loss_db = std::numeric_limits<double>::quiet_NaN();
    ASSERT_TRUE(store_->save_run(aborted_).ok());
  }
  void TearDown() override {
    store_.reset();
    std::filesystem::remove_all(dir_);
  }
  std::filesystem::path dir_;
  std::unique_ptr<RunStore> store_;
  core::RunResult good_, aborted_;
};

TEST_F(DocumentsTest, EachFormatComesWithItsMediaTypeAndRunCount) {
  struct Case {
    std::string scope, key, format, media, starts;
    std::size_t runs;
  };
  const std::vector<Case> cases = {
      {"lot", "L1", "csv", "text/csv", "run_id,serial,lot,recipe,verdict,frequency_hz", 2},
      {"lot", "L1", "runs-csv", "text/csv", kRunCsvColumns.front(), 2},
      {"serial", "WH915A-0001", "json", "application/json", "{", 1},
      {"run", good_.run_id, "s1p", "application/x-touchstone", "! Echoline run " + good_.run_id, 1},
  };
  for (const auto& c : cases) {
    auto doc = export_document(*store_, c.scope, c.key, c.format);
    ASSERT_TRUE(doc.ok()) << c.format << ": " << doc.error().message;
    EXPECT_EQ(doc->media_type, c.media) << c.format;
    EXPECT_EQ(doc->runs, c.runs) << c.format;
    EXPECT_EQ(doc->content.rfind(c.starts, 0), 0u) << c.format << ": " << doc->content.substr(0, 120);
  }
  auto rows = parse_csv(export_document(*store_, "lot", "L1", "runs-csv")->content);
  ASSERT_TRUE(rows.ok());
  EXPECT_EQ(rows->size(), 3u);   // header and one row per run
  auto none = export_document(*store_, "run", "no-such-run", "csv");
  ASSERT_TRUE(none.ok());
  EXPECT_EQ(none->runs, 0u);
}

TEST_F(DocumentsTest, TouchstoneHeaderNamesTheRunCalibrationAndWhatItCannotCarry) {
  auto doc = export_document(*store_, "run", good_.run_id, "s1p");
  ASSERT_TRUE(doc.ok()) << doc.error().message;
  const std::string& t = doc->content;
  EXPECT_NE(t.find("serial WH915A-0001"), std::string::npos);
  EXPECT_NE(t.find("calibration " + good_.calibration_id), std::string::npos);
  EXPECT_NE(t.find("software echolined 0.2.0 (gabc1234)"), std::string::npos);
  EXPECT_NE(t.find("phase unknown, written as 0"), std::string::npos);
  EXPECT_NE(t.find("worst/best return-loss bounds"), std::string::npos);
  // Every comment line comes before the option line (Touchstone v1 allows them anywhere; readers differ).
  const auto option = t.find("\n# HZ S DB R 50\n");
  ASSERT_NE(option, std::string::npos);
  EXPECT_EQ(t.find("\n!", option), std::string::npos);
}

TEST_F(DocumentsTest, BadRequestsAreRefusedNamingWhatIsWrong) {
  auto bad_format = export_document(*store_, "lot", "L1", "xlsx");
  ASSERT_FALSE(bad_format.ok());
  EXPECT_EQ(bad_format.error().kind, ErrorKind::invalid_argument);
  EXPECT_NE(bad_format.error().message.find("\"xlsx\""), std::string::npos) << bad_format.error().message;
  EXPECT_NE(bad_format.error().message.find("s1p"), std::string::npos);

  auto many = export_document(*store_, "lot", "L1", "s1p");
  ASSERT_FALSE(many.ok());
  EXPECT_NE(many.error().message.find("use scope run"), std::string::npos) << many.error().message;

  auto aborted = export_document(*store_, "run", aborted_.run_id, "s1p");
  ASSERT_FALSE(aborted.ok());
  EXPECT_EQ(aborted.error().kind, ErrorKind::invalid_argument);
  EXPECT_NE(aborted.error().message.find("no calibrated return loss at point 1"), std::string::npos)
      << aborted.error().message;
  EXPECT_NE(aborted.error().message.find("receiver timed out"), std::string::npos) << aborted.error().message;
}

}  // namespace
}  // namespace echoline::store
