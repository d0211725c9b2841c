// The stored budget (calibrations.budget_json) keeps the directivity vector from known
// mismatches, the mismatch standards' definitions, a fast capture's frequency offset and the
// offset pair's line when a calibration has them, and budgets stored before they existed load.
#include <cmath>
#include <limits>

#include <gtest/gtest.h>

#include "daemon/store/budget_json.hpp"

namespace echoline::store {
namespace {

core::UncertaintyBudget two_points() {
  core::UncertaintyBudget b;
  b.coverage_factor = 3;
  b.source_match = 0.056;
  b.frequency_hz = {900e6, 910e6};
  b.reference_error_low_db = {-0.05, -0.05};
  b.reference_error_high_db = {0.03, 0.03};
  b.reference_noise_db = {0.01, 0.01};
  b.directivity_bound = {0.03, 0.03};
  b.directivity_measured = {0.02, 0.02};
  b.load_residual = {0.01, 0.01};
  return b;
}

core::UncertaintyBudget with_vector() {
  core::UncertaintyBudget b = two_points();
  b.directivity_re = {0.011, -0.004};
  b.directivity_im = {0.002, 0.015};
  b.directivity_vector_bound = {0.004, 0.0045};
  b.directivity_vector_systematic = {0.0035, 0.004};
  b.directivity_vector_sigma = {0.0002, 0.00021};
  b.directivity_bound_from_load = {0.035, 0.03};   // the vector's |d̂| + r_d was smaller at the first point
  return b;
}

TEST(BudgetJson, KeepsTheDirectivityVector) {
  const core::UncertaintyBudget b = with_vector();
  const auto back = budget_from_json(budget_to_json(b));
  ASSERT_TRUE(back);
  ASSERT_TRUE(back->has_directivity_vector());
  EXPECT_EQ(back->directivity_re, b.directivity_re);
  EXPECT_EQ(back->directivity_im, b.directivity_im);
  EXPECT_EQ(back->directivity_vector_bound, b.directivity_vector_bound);
  EXPECT_EQ(back->directivity_vector_systematic, b.directivity_vector_systematic);
  EXPECT_EQ(back->directivity_vector_sigma, b.directivity_vector_sigma);
  EXPECT_EQ(back->directivity_bound_from_load, b.directivity_bound_from_load);
}

// A budget stored before the mismatches could tighten the directivity bound has no LOAD-only
// copy: the bound it used was the LOAD's, it loads without one and is written back unchanged.
TEST(BudgetJson, AnOlderVectorBudgetReadsBackUnchanged) {
  core::UncertaintyBudget b = with_vector();
  b.directivity_bound_from_load.clear();
  const std::string text = budget_to_json(b);
  ASSERT_EQ(text.find("directivity_bound_from_load"), std::string::npos);
  const auto back = budget_from_json(text);
  ASSERT_TRUE(back);
  EXPECT_TRUE(back->directivity_bound_from_load.empty());
  EXPECT_EQ(back->directivity_bound, b.directivity_bound);
  // Read and written again, the text is the same: the calibration's document hash, which the
  // central database compares, does not change across an upgrade.
  EXPECT_EQ(budget_to_json(*back), text);
}

TEST(BudgetJson, ABudgetWithoutItStaysWithout) {
  const auto back = budget_from_json(budget_to_json(two_points()));
  ASSERT_TRUE(back);
  EXPECT_FALSE(back->has_directivity_vector());
  EXPECT_EQ(budget_to_json(two_points()).find("directivity_re"), std::string::npos);
}

// A calibration that failed its checks can hold an infinite directivity bound (the LOAD read as
// loud as the OPEN) or a NaN. JSON has no such numbers (RFC 8259 §6); the budget still reads
// back whole, so a failed calibration is kept and shown as it was, not as "unreadable". Text
// stored when they were written as null reads back as NaN.
TEST(BudgetJson, InfinityAndNaNReadBack) {
  core::UncertaintyBudget b = two_points();
  b.directivity_bound = {std::numeric_limits<double>::infinity(), 0.03};
  b.reference_error_low_db = {-std::numeric_limits<double>::infinity(), -0.05};
  b.directivity_measured = {std::numeric_limits<double>::quiet_NaN(), 0.02};
  const std::string text = budget_to_json(b);
  const auto back = budget_from_json(text);
  ASSERT_TRUE(back) << text;
  EXPECT_TRUE(std::isinf(back->directivity_bound[0]) && back->directivity_bound[0] > 0) << text;
  EXPECT_TRUE(std::isinf(back->reference_error_low_db[0]) && back->reference_error_low_db[0] < 0) << text;
  EXPECT_TRUE(std::isnan(back->directivity_measured[0])) << text;
  EXPECT_EQ(back->directivity_bound[1], 0.03);
  EXPECT_EQ(budget_to_json(*back), text);

  std::string old = text;
  old.replace(old.find("\"inf\""), 5, "null");
  const auto from_null = budget_from_json(old);
  ASSERT_TRUE(from_null) << old;
  EXPECT_TRUE(std::isnan(from_null->directivity_bound[0]));
  EXPECT_FALSE(budget_from_json(text.substr(0, text.find("\"inf\"")) + "\"infinite\"" +
                                text.substr(text.find("\"inf\"") + 5)));
}

TEST(BudgetJson, AShortDirectivityVectorIsRefused) {
  std::string text = budget_to_json(with_vector());
  const std::string full = "\"directivity_re\":[0.011,-0.004]";
  ASSERT_NE(text.find(full), std::string::npos) << text;
  text.replace(text.find(full), full.size(), "\"directivity_re\":[0.011]");
  EXPECT_FALSE(budget_from_json(text));
}

// The kit's definitions of the mismatch standards measured travel with the budget, so a stored
// calibration can be worked again offline; a budget without them stays without the key.
TEST(BudgetJson, KeepsTheMismatchDefinitions) {
  core::UncertaintyBudget b = two_points();
  core::MismatchStandard m;
  m.name = "MISMATCH-B";
  m.magnitude = 0.1;
  m.magnitude_tolerance = 0.002;
  m.phase_rad = 0.01;
  m.offset_delay_s = 137e-12;
  m.phase_tolerance_rad = 0.0175;
  b.mismatch = {m};
  const auto back = budget_from_json(budget_to_json(b));
  ASSERT_TRUE(back);
  ASSERT_EQ(back->mismatch.size(), 1u);
  EXPECT_EQ(back->mismatch[0].name, "MISMATCH-B");
  EXPECT_EQ(back->mismatch[0].magnitude, 0.1);
  EXPECT_EQ(back->mismatch[0].magnitude_tolerance, 0.002);
  EXPECT_EQ(back->mismatch[0].phase_rad, 0.01);
  EXPECT_EQ(back->mismatch[0].offset_delay_s, 137e-12);
  EXPECT_EQ(back->mismatch[0].phase_tolerance_rad, 0.0175);
  EXPECT_EQ(budget_to_json(two_points()).find("mismatch"), std::string::npos);
  EXPECT_TRUE(budget_from_json(budget_to_json(two_points()))->mismatch.empty());
}

// A calibration for a recipe with the offset pair keeps the kit's line, so its runs are judged
// again offline with the same figures; one without keeps none.
TEST(BudgetJson, KeepsTheOffsetLine) {
  core::UncertaintyBudget b = two_points();
  core::OffsetLine l;
  l.delay_s = 273.2e-12;
  l.delay_tolerance_s = 2e-12;
  l.loss_db = 0.08;
  l.loss_tolerance_db = 0.04;
  l.match = 0.0112;
  b.offset_line = l;
  const auto back = budget_from_json(budget_to_json(b));
  ASSERT_TRUE(back);
  ASSERT_TRUE(back->offset_line.has_value());
  EXPECT_EQ(back->offset_line->delay_s, 273.2e-12);
  EXPECT_EQ(back->offset_line->delay_tolerance_s, 2e-12);
  EXPECT_EQ(back->offset_line->loss_db, 0.08);
  EXPECT_EQ(back->offset_line->loss_tolerance_db, 0.04);
  EXPECT_EQ(back->offset_line->match, 0.0112);
  EXPECT_EQ(budget_to_json(two_points()).find("offset_line"), std::string::npos);
  EXPECT_FALSE(budget_from_json(budget_to_json(two_points()))->offset_line.has_value());
}

// A fast capture's budget keeps its frequency offset (half a bin, MEASUREMENT.md §11), so a stored
// run is judged again with the same term; a budget stored without the key is a step sweep's (0).
TEST(BudgetJson, KeepsTheFastCaptureFrequencyOffset) {
  core::UncertaintyBudget b = two_points();
  b.frequency_offset_hz = 0.25e6;
  const auto back = budget_from_json(budget_to_json(b));
  ASSERT_TRUE(back);
  EXPECT_EQ(back->frequency_offset_hz, 0.25e6);
  std::string text = budget_to_json(two_points());
  const std::string key = "\"frequency_offset_hz\":0.0,";
  ASSERT_NE(text.find(key), std::string::npos) << text;
  text.erase(text.find(key), key.size());
  const auto old = budget_from_json(text);
  ASSERT_TRUE(old);
  EXPECT_EQ(old->frequency_offset_hz, 0.0);
}

}  // namespace
}  // namespace echoline::store
