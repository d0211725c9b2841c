// Decision-rule zones (daemon/core/decision.hpp).
// Sources: JCGM 106:2012 §8.2 simple acceptance and §8.3.2 guarded acceptance [clause numbers
// from memory]; ILAC-G8:09/2019 §4.2.1 (binary, simple acceptance) and §4.2.3
// (non-binary: the conditional zone) [verified against the published text].
#include "daemon/core/decision.hpp"

#include <limits>

#include <gtest/gtest.h>

#include "daemon/core/rf_math.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Bounds clear of the limit: both rules agree.
TEST(Decision, ClearPassAndClearFailAgreeUnderBothRules) {
  for (DecisionRule rule : {DecisionRule::simple, DecisionRule::guarded}) {
    EXPECT_EQ(decide_lower_limit(rule, 15, 13, 18, 10), Verdict::pass);
    EXPECT_EQ(decide_lower_limit(rule, 6, 5, 7, 10), Verdict::fail);
  }
}

// ILAC-G8 §4.2.3 / JCGM 106 §8.3.2: a value whose interval straddles the limit is inconclusive
// under guarded acceptance; under simple acceptance (§4.2.1, JCGM 106 §8.2) the measured value
// alone decides.
TEST(Decision, StraddlingIntervalIsInconclusiveGuardedAndMeasuredDecidesSimple) {
  EXPECT_EQ(decide_lower_limit(DecisionRule::guarded, 10.4, 9.5, 11.4, 10), Verdict::inconclusive);
  EXPECT_EQ(decide_lower_limit(DecisionRule::simple, 10.4, 9.5, 11.4, 10), Verdict::pass);
  EXPECT_EQ(decide_lower_limit(DecisionRule::guarded, 9.7, 8.9, 10.6, 10), Verdict::inconclusive);
  EXPECT_EQ(decide_lower_limit(DecisionRule::simple, 9.7, 8.9, 10.6, 10), Verdict::fail);
}

// Worst-case guarded limit (derived from the one-port bounds, no published source): to guarantee true RL >= 10 dB with
// D = 30 dB the measured RL must be >= 10.9151 dB. Just above passes, just below is inconclusive.
TEST(Decision, GuardedAcceptanceLimitMatchesDerivedGuardBand) {
  auto verdict = [](double measured) {
    ReturnLossBounds b = return_loss_bounds(measured, 30, kInf);
    return decide_lower_limit(DecisionRule::guarded, measured, b.worst_db, b.best_db, 10);
  };
  EXPECT_EQ(verdict(10.9160), Verdict::pass);
  EXPECT_EQ(verdict(10.9140), Verdict::inconclusive);
  // Same table: TL 20 dB, D 40 dB -> measured >= 20.9151 dB.
  ReturnLossBounds b = return_loss_bounds(20.9160, 40, kInf);
  EXPECT_GE(b.worst_db, 20.0);
  b = return_loss_bounds(20.9140, 40, kInf);
  EXPECT_LT(b.worst_db, 20.0);
}

// Fail under guarded only when even the best case misses the limit.
TEST(Decision, GuardedFailsOnlyWhenBestCaseMisses) {
  EXPECT_EQ(decide_lower_limit(DecisionRule::guarded, 8.0, 7.0, 9.99, 10), Verdict::fail);
  EXPECT_EQ(decide_lower_limit(DecisionRule::guarded, 8.0, 7.0, 10.0, 10), Verdict::inconclusive);
  EXPECT_EQ(decide_lower_limit(DecisionRule::guarded, 30, 24, kInf, 10), Verdict::pass);
}

// On the limit: simple acceptance accepts (the acceptance limit equals the tolerance limit).
TEST(Decision, SimpleAcceptsAValueExactlyOnTheLimit) {
  EXPECT_EQ(decide_lower_limit(DecisionRule::simple, 10, 9, 11, 10), Verdict::pass);
}

TEST(Decision, WindowZones) {
  // Inside with its uncertainty -> pass; straddling an edge -> inconclusive (guarded) / by value (simple).
  EXPECT_EQ(decide_window(DecisionRule::guarded, 915e6, 914.7e6, 915.3e6, 905e6, 925e6), Verdict::pass);
  EXPECT_EQ(decide_window(DecisionRule::guarded, 905.1e6, 904.8e6, 905.4e6, 905e6, 925e6), Verdict::inconclusive);
  EXPECT_EQ(decide_window(DecisionRule::simple, 905.1e6, 904.8e6, 905.4e6, 905e6, 925e6), Verdict::pass);
  EXPECT_EQ(decide_window(DecisionRule::guarded, 897e6, 896.7e6, 897.3e6, 905e6, 925e6), Verdict::fail);
  EXPECT_EQ(decide_window(DecisionRule::guarded, 930e6, 929.7e6, kInf, 905e6, 925e6), Verdict::fail);
  EXPECT_EQ(decide_window(DecisionRule::simple, 926e6, 925.7e6, 926.3e6, 905e6, 925e6), Verdict::fail);
}

TEST(Decision, CombineOrdersFailOverInconclusiveOverPass) {
  EXPECT_EQ(combine(Verdict::pass, Verdict::inconclusive), Verdict::inconclusive);
  EXPECT_EQ(combine(Verdict::fail, Verdict::inconclusive), Verdict::fail);
  EXPECT_EQ(combine(Verdict::pass, Verdict::pass), Verdict::pass);
  EXPECT_EQ(combine(Verdict::fail, Verdict::aborted), Verdict::aborted);
}

}  // namespace
}  // namespace echoline::core
