// The client's pure parts: verdict banner, return-loss plot, progress, advice to the operator,
// lot yield, option parsing and API reply decoding.
#include <gtest/gtest.h>
#include <fmt/format.h>

#include <cmath>
#include <sstream>

#include "daemon/client/api_client.hpp"
#include "daemon/core/decision.hpp"
#include "daemon/client/console.hpp"
#include "daemon/client/cli.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/line_input.hpp"
#include "daemon/client/progress_bar.hpp"
#include "daemon/client/run_table.hpp"
#include "daemon/client/text_plot.hpp"
#include "daemon/client/unit_advice.hpp"
#include "daemon/client/verdict_banner.hpp"
#include "daemon/store/export.hpp"
#include "daemon/store/lot_report.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/support/process.hpp"

namespace echoline::client {
namespace {

using nlohmann::json;

int count_lines(const std::string& s) {
  int n = 0;
  for (char c : s) n += c == '\n';
  return n;
}

// The plot rows only (between the title and the x axis), without legend or labels.
std::string plot_rows(const std::string& plot) {
  std::string rows;
  std::size_t start = 0;
  while (start < plot.size()) {
    const auto nl = plot.find('\n', start);
    const std::string line = plot.substr(start, nl - start);
    if (const auto bar = line.find('|'); bar != std::string::npos) rows += line.substr(bar + 1) + "\n";
    start = nl + 1;
  }
  return rows;
}

TEST(ClientBanner, BlockLettersAreFiveRowsOfOurFont) {
  const std::string p = block_letters("P");
  EXPECT_EQ(count_lines(p), 5);
  EXPECT_EQ(p, "####\n#   #\n####\n#\n#\n");   // trailing blanks trimmed
}

TEST(ClientBanner, EveryVerdictIsFramedAndUnknownLettersShowAQuestionMark) {
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    const std::string b = verdict_banner(v, false);
    EXPECT_EQ(count_lines(b), 7) << v;   // rule, 5 rows, rule
    EXPECT_EQ(b.find('\x1b'), std::string::npos) << v;
  }
  EXPECT_EQ(block_letters("Z"), block_letters("?"));
}

TEST(ClientBanner, ColourOnlyWhenAskedAndDifferentPerVerdict) {
  const std::string pass = verdict_banner("pass", true);
  const std::string fail = verdict_banner("fail", true);
  EXPECT_NE(pass.find("\x1b["), std::string::npos);
  EXPECT_NE(pass.find("\x1b[0m"), std::string::npos);
  EXPECT_NE(verdict_colour("pass"), verdict_colour("fail"));
  EXPECT_NE(verdict_colour("inconclusive"), verdict_colour("aborted"));
  EXPECT_NE(pass, fail);
}

TEST(ClientPlot, DrawsLimitLinePointsAndAxisLabels) {
  std::vector<PlotPoint> pts;
  for (int i = 0; i <= 200; ++i) {
    const double f = 860e6 + i * 0.55e6;
    const double rl = 3 + 20 * std::exp(-std::pow((f - 915e6) / 8e6, 2));   // dip at 915 MHz
    pts.push_back({f, rl});
  }
  const std::string plot = return_loss_plot(pts, {{902e6, 928e6, 10}});
  EXPECT_NE(plot.find("860.0"), std::string::npos);
  EXPECT_NE(plot.find("970.0"), std::string::npos);
  EXPECT_NE(plot.find("MHz"), std::string::npos);
  EXPECT_NE(plot.find("dB"), std::string::npos);
  const std::string rows = plot_rows(plot);
  EXPECT_NE(rows.find('-'), std::string::npos);
  EXPECT_NE(rows.find('*'), std::string::npos);
  // Near the band edges the dip is below 10 dB: those columns are marked as missing the limit.
  EXPECT_NE(rows.find('x'), std::string::npos);
  // 12 plot rows + title + axis + labels + legend.
  EXPECT_EQ(count_lines(plot), 16);
}

TEST(ClientPlot, PointsAllAboveTheLimitHaveNoMissMarks) {
  std::vector<PlotPoint> pts{{900e6, 20}, {915e6, 25}, {930e6, 20}};
  const std::string rows = plot_rows(return_loss_plot(pts, {{902e6, 928e6, 10}}));
  EXPECT_EQ(rows.find('x'), std::string::npos);
  EXPECT_NE(rows.find('*'), std::string::npos);
}

TEST(ClientPlot, NoFinitePointsSaysSo) {
  const std::string plot = return_loss_plot({{900e6, std::nan("")}}, {});
  EXPECT_NE(plot.find("no return-loss points"), std::string::npos);
}

TEST(ClientProgress, BarShowsPointOfTotal) {
  EXPECT_EQ(progress_bar(0, 10, 10), "[..........]    0/10");
  EXPECT_EQ(progress_bar(5, 10, 10), "[#####.....]    5/10");
  EXPECT_EQ(progress_bar(17, 201).find(" 17/201") != std::string::npos, true);
}

TEST(ClientProgress, OnAPipeAFewPlainLinesWithoutControlCodes) {
  std::ostringstream out;
  ProgressDisplay d(out, false, "measuring X");
  for (int i = 1; i <= 201; ++i) d.update(i, 201);
  d.finish();
  const std::string text = out.str();
  EXPECT_EQ(text.find('\r'), std::string::npos);
  EXPECT_EQ(text.find('\x1b'), std::string::npos);
  EXPECT_GE(count_lines(text), 2);
  EXPECT_LE(count_lines(text), 6);
  EXPECT_NE(text.find("point 201 of 201"), std::string::npos);
}

TEST(ClientProgress, OnATerminalUpdatesInPlace) {
  std::ostringstream out;
  ProgressDisplay d(out, true, "measuring X");
  for (int i = 1; i <= 5; ++i) d.update(i, 5);
  d.finish();
  EXPECT_EQ(count_lines(out.str()), 1);
  EXPECT_NE(out.str().find('\r'), std::string::npos);
}

TEST(ClientAdvice, PassGoesToThePassTray) {
  EXPECT_EQ(advise(json{{"verdict", "pass"}}, false).action, "Put it in the PASS tray.");
}

TEST(ClientAdvice, TooLongElementGoesToReworkWithTheCut) {
  json run = {{"verdict", "fail"}, {"failure_class", "tuned-low"}, {"trim", {{"change_mm", -1.94}, {"text", "cut 1.9 mm"}}}};
  EXPECT_EQ(advise(run, false).action, "Put it in the REWORK tray: cut 1.9 mm from the element.");
}

TEST(ClientAdvice, TooShortOrBrokenGoesToReject) {
  json short_el = {{"verdict", "fail"}, {"trim", {{"change_mm", 3.0}}}};
  EXPECT_NE(advise(short_el, false).action.find("REJECT"), std::string::npos);
  json open_feed = {{"verdict", "fail"}, {"failure_class", "no-response"}, {"trim", nullptr}};
  EXPECT_NE(advise(open_feed, false).action.find("no response"), std::string::npos);
}

// A trace that jumps between full reflection and a dip: a loose seat reads like an intermittent
// feed, so the first run asks for a reseat and the retest that jumps again goes to REJECT.
TEST(ClientAdvice, IntermittentTraceReseatsOnceThenRejects) {
  json run = {{"verdict", "fail"},
              {"failure_class", "no-response"},
              {"reason", std::string(core::kIntermittentTrace) + " (14 jumps of more than 10 dB ...)"},
              {"retest", false}};
  const auto first = advise(run, false);
  EXPECT_NE(first.action.find("Reseat"), std::string::npos) << first.action;
  EXPECT_EQ(first.action.find("broken or shorted"), std::string::npos) << first.action;
  run["retest"] = true;
  const auto again = advise(run, false);
  EXPECT_NE(again.action.find("REJECT"), std::string::npos) << again.action;
  EXPECT_NE(again.action.find("intermittent"), std::string::npos) << again.action;
}

TEST(ClientAdvice, InconclusiveOnceRetestTwiceEngineering) {
  json run = {{"verdict", "inconclusive"}};
  EXPECT_NE(advise(run, false).action.find("Retest once"), std::string::npos);
  EXPECT_NE(advise(run, true).action.find("engineering"), std::string::npos);
}

// A unit the bench's systematic interval leaves undecided: no retest, straight to engineering.
TEST(ClientAdvice, InconclusiveThatNoRetestCanSettleGoesToEngineering) {
  json run = {{"verdict", "inconclusive"},
              {"reason", std::string("return loss 10.2 dB at 927.5 MHz is within the measurement uncertainty. ") +
                             core::kRetestCannotSettle + ": ..."}};
  const auto a = advise(run, false);
  EXPECT_NE(a.action.find("engineering"), std::string::npos) << a.action;
  EXPECT_EQ(a.action.find("Retest"), std::string::npos) << a.action;
}

TEST(ClientAdvice, AbortedIsNeverJudged) {
  json run = {{"verdict", "aborted"}, {"reason", "instrument trouble: not ready: analyzer: timeout"}};
  EXPECT_EQ(advise(run, false).action, "Instrument trouble: unit not judged, test it again.");
  json cancelled = {{"verdict", "aborted"}, {"reason", "cancelled by request"}};
  EXPECT_NE(advise(cancelled, false).action.find("not judged"), std::string::npos);
}

TEST(ClientAdvice, MetricsLineLeavesOutNulls) {
  json run = {{"metrics", {{"resonance_hz", 915.25e6}, {"depth_db", 24.08}, {"bandwidth_hz", nullptr}}}};
  EXPECT_EQ(metrics_line(run), "resonance 915.25 MHz, depth 24.1 dB");
}

TEST(ClientRunTable, LatestRunPerSerialDecidesTheYield) {
  json runs = json::array({{{"serial", "A"}, {"verdict", "fail"}},
                           {{"serial", "A"}, {"verdict", "pass"}},     // reworked, passes
                           {{"serial", "B"}, {"verdict", "fail"}},
                           {{"serial", "C"}, {"verdict", "aborted"}}});
  const LotYield y = lot_yield(runs);
  EXPECT_EQ(y.units, 3);
  EXPECT_EQ(y.judged, 2);
  EXPECT_EQ(y.passed, 1);
  EXPECT_DOUBLE_EQ(y.yield, 0.5);
  const std::string table = run_table(runs);
  EXPECT_EQ(count_lines(table), 5);   // header + 4
}

TEST(ClientArgs, UnknownOptionIsAUsageError) {
  try {
    Args a({"--lot", "L", "--bogus"}, "runs", {"--lot"}, {"--help"}, 0);
    FAIL() << "no error";
  } catch (const CliExit& e) {
    EXPECT_EQ(e.code, kExitUsage);
    EXPECT_NE(std::string(e.what()).find("--bogus"), std::string::npos);
  }
}

TEST(ClientArgs, ValuesInlineOrSeparate) {
  Args a({"--lot=L1", "--serial", "S1", "--help"}, "runs", {"--lot", "--serial"}, {"--help"}, 0);
  EXPECT_EQ(a.get_or("--lot", ""), "L1");
  EXPECT_EQ(a.get_or("--serial", ""), "S1");
  EXPECT_TRUE(a.flag("--help"));
  EXPECT_THROW(Args({"--lot"}, "runs", {"--lot"}, {}, 0), CliExit);
  EXPECT_THROW(Args({"extra"}, "runs", {}, {}, 0), CliExit);
}

TEST(ClientApi, ReplyDecodingKeepsCodeAndMessage) {
  ApiReply ok = to_reply(json::parse(R"({"v":1,"id":3,"ok":true,"result":{"points":81}})"));
  EXPECT_TRUE(ok.ok);
  EXPECT_EQ(ok.result["points"], 81);
  ApiReply no = to_reply(json::parse(R"({"v":1,"id":4,"ok":false,"error":{"code":"busy","message":"busy: test of X"}})"));
  EXPECT_FALSE(no.ok);
  EXPECT_EQ(no.code, "busy");
  EXPECT_EQ(no.message, "busy: test of X");
}

TEST(ClientApi, ErrorCodesMapToDocumentedExitCodes) {
  EXPECT_EQ(exit_code_for_api_error("instrument"), kExitInstrument);
  EXPECT_EQ(exit_code_for_api_error("storage"), kExitStorage);
  EXPECT_EQ(exit_code_for_api_error("forbidden"), kExitUsage);
  EXPECT_EQ(exit_code_for_api_error("not_found"), kExitNegative);
  EXPECT_EQ(exit_code_for_api_error("shutting_down"), kExitUnreachable);
}

TEST(ClientInput, ScannerLinesAreTrimmedAndPeekDoesNotConsume) {
  std::istringstream in(" WH915A-0001\r\n\n\tq \n");
  LineInput li(in, false);
  EXPECT_EQ(li.peek().value(), "WH915A-0001");
  EXPECT_EQ(li.next().value(), "WH915A-0001");
  EXPECT_EQ(li.next().value(), "");
  EXPECT_EQ(li.next().value(), "q");
  EXPECT_FALSE(li.next().has_value());
}

TEST(ClientInput, HeldSerialsComeFirstInScanOrderButNotToPrompts) {
  std::istringstream in("y\nC\n");
  LineInput li(in, false);
  li.hold("A");
  li.hold("B");
  EXPECT_EQ(li.next_typed().value(), "y");   // a prompt reads what is typed after it
  EXPECT_EQ(li.next().value(), "A");
  EXPECT_EQ(li.next().value(), "B");
  EXPECT_EQ(li.next().value(), "C");
  EXPECT_EQ(li.held(), 0u);
}

// One definition of yield (daemon/store/README.md, "Queries and yield"): the store's query, the
// lot report, `echoline runs`/`report` and the console's summary agree on one lot with retests
// and aborted runs.
TEST(Yield, StoreLotReportClientAndConsoleAgreeOnOneLot) {
  struct Row { const char* serial; core::Verdict verdict; };
  // A: fail then pass (reworked); B: pass, then a run aborted; C: aborted only; D: fail;
  // E: pass, then fail.
  const std::vector<Row> rows = {{"A", core::Verdict::fail},    {"B", core::Verdict::pass}, {"C", core::Verdict::aborted},
                                 {"D", core::Verdict::fail},    {"E", core::Verdict::pass}, {"A", core::Verdict::pass},
                                 {"B", core::Verdict::aborted}, {"E", core::Verdict::fail}};
  std::vector<core::RunResult> runs;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    core::RunResult r;
    r.run_id = fmt::format("20261203T100{}00Z-y-{}", i, i);
    r.serial = rows[i].serial;
    r.lot = "LOT-Y";
    r.station = "bench";
    r.started_utc = fmt::format("2026-12-03T10:0{}:00.000Z", i);
    r.ended_utc = fmt::format("2026-12-03T10:0{}:30.000Z", i);
    r.verdict = rows[i].verdict;
    if (r.verdict == core::Verdict::fail) r.failure_class = core::FailureClass::tuned_low;
    runs.push_back(r);
  }
  // Units with a finished run: A, B, D, E; latest finished run passed: A, B.
  const double expected = 2.0 / 4.0;

  testing::TempDir dir("echoline-yield");
  auto st = store::RunStore::open(dir / "y.sqlite");
  ASSERT_TRUE(st.ok()) << st.error().message;
  for (const auto& r : runs) ASSERT_TRUE((*st)->save_run(r).ok()) << r.run_id;
  auto by_lot = (*st)->yield_by(store::YieldGroup::lot, "LOT-Y");
  ASSERT_TRUE(by_lot.ok() && by_lot->size() == 1u);
  EXPECT_EQ(by_lot->front().units_tested, 4);
  EXPECT_DOUBLE_EQ(by_lot->front().final_yield, expected);

  const store::LotStats stats = store::compute_lot_stats(runs, {});
  EXPECT_DOUBLE_EQ(stats.final_yield, expected);
  EXPECT_EQ(stats.units_by_final_verdict.at("pass"), 2);
  const std::string html = store::build_lot_report("LOT-Y", runs, {}, {});
  EXPECT_NE(html.find(">50.0%<"), std::string::npos);

  json listed = json::array();
  for (const auto& r : runs) listed.push_back(store::run_to_json(r, false));
  const LotYield y = lot_yield(listed);
  EXPECT_EQ(y.units, 5);
  EXPECT_EQ(y.judged, 4);
  EXPECT_EQ(y.passed, 2);
  EXPECT_DOUBLE_EQ(y.yield, expected);

  SessionSummary session;
  for (const auto& r : runs) session.outcomes.push_back({"session", r.serial, core::to_string(r.verdict), ""});
  EXPECT_DOUBLE_EQ(session.yield(), expected);
  EXPECT_EQ(session.units_judged(), 4);
}

}  // namespace
}  // namespace echoline::client
