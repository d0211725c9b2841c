// The lot report: well-formed SVG (checked by Python's XML parser in a child process), one trace
// per unit, escaped input, statistics and Cpk. Also a demo report writer and a timing printout.
#include "daemon/store/lot_report.hpp"

#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <random>
#include <set>

#include <fmt/format.h>

#include "daemon/store/export.hpp"
#include "daemon/store/svg_plot.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using core::FailureClass;
using core::Verdict;

// A demo lot: most units near 915 MHz, some tuned low/high, some shallow, a few retests.
std::vector<core::RunResult> demo_lot(int n_runs, unsigned seed = 7) {
  std::mt19937 rng(seed);
  std::normal_distribution<double> f0(915.5e6, 3.2e6);
  std::vector<core::RunResult> runs;
  int unit = 0;
  for (int i = 0; static_cast<int>(runs.size()) < n_runs; ++i) {
    const std::string serial = fmt::format("WH915A-{:04}", ++unit);
    double f = f0(rng);
    if (unit % 17 == 0) f = 897e6;
    if (unit % 23 == 0) f = 934e6;
    Verdict v = Verdict::pass;
    FailureClass c = FailureClass::none;
    if (f < 905e6) { v = Verdict::fail; c = FailureClass::tuned_low; }
    else if (f > 925e6) { v = Verdict::fail; c = FailureClass::tuned_high; }
    else if (f < 906e6 || f > 924e6) { v = Verdict::inconclusive; c = FailureClass::tuned_high; }
    if (unit % 31 == 0) { v = Verdict::fail; c = FailureClass::shallow; }
    if (unit % 53 == 0) v = Verdict::aborted, c = FailureClass::none;
    auto r = testdata::make_run(serial, "WH915-L2407", static_cast<int>(runs.size()) * 7, f, v, c);
    if (v == Verdict::aborted) {
      r.points.resize(90);
      r.reason = "receiver: *OPC? timed out after 30000 ms";
      r.metrics = {};
      r.trim.reset();
    }
    if (c == FailureClass::shallow) {
      for (auto& p : r.points) { p.return_loss_db *= 0.35; p.return_loss_worst_db *= 0.35; }
      r.metrics.depth_db *= 0.35;
      r.reason = "dip depth 7.4 dB is below 9.54 dB";
    }
    runs.push_back(r);
    if (v == Verdict::fail && c == FailureClass::tuned_low && static_cast<int>(runs.size()) < n_runs) {
      auto retest = testdata::make_run(serial, "WH915-L2407", static_cast<int>(runs.size()) * 7, 915e6);
      retest.retest = true;
      runs.push_back(retest);
    }
  }
  return runs;
}

std::vector<std::string> svgs_of(const std::string& html) {
  std::vector<std::string> out;
  for (std::size_t at = html.find("<svg"); at != std::string::npos; at = html.find("<svg", at + 1)) {
    const auto end = html.find("</svg>", at);
    if (end == std::string::npos) break;
    out.push_back(html.substr(at, end + 6 - at));
  }
  return out;
}

// Runs python3's XML parser on each piece (one child process for all); returns its error output
// ("" when every piece is well-formed).
std::string xml_errors(const std::vector<std::string>& pieces, const std::filesystem::path& dir) {
  std::string cmd = "python3 -c 'import sys,xml.dom.minidom\nfor f in sys.argv[1:]: xml.dom.minidom.parse(f)'";
  for (std::size_t i = 0; i < pieces.size(); ++i) {
    const auto file = dir / ("piece" + std::to_string(i) + ".svg");
    std::ofstream out(file, std::ios::binary);
    out << pieces[i];
    cmd += " " + file.string();
  }
  cmd += " 2>&1";
  std::FILE* p = ::popen(cmd.c_str(), "r");
  std::string err;
  char buf[512];
  while (p && std::fgets(buf, sizeof buf, p)) err += buf;
  const int rc = p ? ::pclose(p) : -1;
  return rc == 0 ? std::string() : (err.empty() ? "python3 failed" : err);
}

std::size_t occurrences(const std::string& s, const std::string& what) {
  std::size_t n = 0;
  for (auto at = s.find(what); at != std::string::npos; at = s.find(what, at + 1)) ++n;
  return n;
}

// A unit with no dip and a unit whose maximum sits on the sweep's last point have no resonance
// the statistics can use: they are counted as left out, and the mean and spread are those of
// the others (elementary statistics).
TEST(LotStats, ResonanceStatisticsLeaveOutNoDipAndTheSweepsEnds) {
  std::vector<core::RunResult> runs;
  runs.push_back(testdata::make_run("A", "L", 1, 910e6));
  runs.push_back(testdata::make_run("B", "L", 2, 920e6));
  runs.push_back(testdata::make_run("C", "L", 3, 1100e6, Verdict::fail, FailureClass::tuned_high));   // max on 950 MHz
  runs.push_back(testdata::make_run("D", "L", 4, 930e6, Verdict::fail, FailureClass::no_response));
  ASSERT_DOUBLE_EQ(*runs[2].metrics.resonance_hz, runs[2].points.back().frequency_hz);
  const auto st = compute_lot_stats(runs, testdata::demo_limits());
  EXPECT_EQ(st.resonances_left_out, 2);
  ASSERT_EQ(st.resonances_hz.size(), 2u);
  ASSERT_TRUE(st.mean_hz);
  EXPECT_NEAR(*st.mean_hz, (*runs[0].metrics.resonance_hz + *runs[1].metrics.resonance_hz) / 2, 1e-3);
  const std::string html = build_lot_report("L", runs, {}, testdata::demo_limits());
  EXPECT_NE(html.find("n = 2 (2 left out"), std::string::npos);
}

TEST(LotStats, CountsParetoAndCpk) {
  std::vector<core::RunResult> runs;
  runs.push_back(testdata::make_run("A", "L", 1, 910e6));
  runs.push_back(testdata::make_run("B", "L", 2, 915e6));
  runs.push_back(testdata::make_run("C", "L", 3, 920e6));
  runs.push_back(testdata::make_run("D", "L", 4, 897e6, Verdict::fail, FailureClass::tuned_low));
  runs.push_back(testdata::make_run("D", "L", 5, 915e6));   // retest passes: final run counts
  runs.push_back(testdata::make_run("E", "L", 6, 940e6, Verdict::fail, FailureClass::tuned_high));
  // Resonances are the sweep grid point nearest each f0 (350 kHz grid); recompute from the runs.
  std::vector<double> f;
  for (std::size_t i : final_runs(runs)) f.push_back(*runs[i].metrics.resonance_hz);
  const auto st = compute_lot_stats(runs, testdata::demo_limits());
  EXPECT_EQ(st.runs, 6);
  EXPECT_EQ(st.units, 5);
  EXPECT_EQ(st.units_by_final_verdict.at("pass"), 4);
  EXPECT_DOUBLE_EQ(st.final_yield, 0.8);
  ASSERT_EQ(st.pareto.size(), 1u);
  EXPECT_EQ(st.pareto[0].first, "tuned-high");
  double mean = 0;
  for (double x : f) mean += x;
  mean /= f.size();
  double ss = 0;
  for (double x : f) ss += (x - mean) * (x - mean);
  const double sigma = std::sqrt(ss / (f.size() - 1));   // sample standard deviation
  ASSERT_TRUE(st.mean_hz && st.stddev_hz && st.cpk);
  EXPECT_NEAR(*st.mean_hz, mean, 1e-3);
  EXPECT_NEAR(*st.stddev_hz, sigma, 1e-3);
  // Cpk = min(USL - mean, mean - LSL) / (3 sigma): common practice, no source.
  EXPECT_NEAR(*st.cpk, std::min(925e6 - mean, mean - 905e6) / (3 * sigma), 1e-9);
}

TEST(LotReport, SvgIsWellFormedAndHasOneTracePerUnit) {
  const auto dir = testdata::temp_dir("report");
  auto runs = demo_lot(240);
  runs[3].serial = "WH<915>&\"x\"";   // as if an unchecked serial reached the report
  runs[4].verdict = Verdict::fail;
  runs[4].reason = "<script>alert(1)</script> & more";
  std::vector<core::CalibrationRecord> cals = {testdata::make_calibration("cal-0001", "2026-03-02T07:40:00.000Z")};
  const auto html = build_lot_report("WH915-L2407", runs, cals, testdata::demo_limits(), {"2026-03-02T18:00:00Z", std::nullopt});
  const auto svgs = svgs_of(html);
  ASSERT_EQ(svgs.size(), 3u);   // Pareto, histogram, overlay
  auto pieces = svgs;
  const auto unit_svg = unit_trace_svg(runs[0], testdata::demo_limits());
  pieces.push_back(unit_svg);
  EXPECT_EQ(xml_errors(pieces, dir), "");
  const auto units = final_runs(runs).size();
  EXPECT_EQ(occurrences(html, "<path class=\"trace "), units);
  EXPECT_EQ(html.find("<script>"), std::string::npos);
  EXPECT_NE(html.find("&lt;script&gt;alert(1)&lt;/script&gt; &amp; more"), std::string::npos);
  EXPECT_NE(html.find("WH&lt;915&gt;&amp;&quot;x&quot;"), std::string::npos);
  EXPECT_EQ(html.find("http://", html.find("<body")), html.find("http://www.w3.org/2000/svg", html.find("<body")));
  EXPECT_NE(html.find("frequency (MHz)"), std::string::npos);
  EXPECT_NE(html.find("return loss (dB)"), std::string::npos);
  EXPECT_NE(html.find("Cpk = "), std::string::npos);
  EXPECT_NE(html.find("cal-0001"), std::string::npos);
  EXPECT_NE(html.find("29.5"), std::string::npos);   // the calibration's minimum directivity
  // The recipe text for the nominal unit, from the units this lot did not fail (nominal_from_lot.hpp).
  EXPECT_NE(html.find("<h2>Nominal unit for the recipe</h2>"), std::string::npos);
  EXPECT_NE(html.find("&quot;nominal_unit&quot;: { "), std::string::npos);
  EXPECT_EQ(occurrences(unit_svg, "<path class=\"trace "), 1u);
  std::filesystem::remove_all(dir);
}

// Tick labels of the count axis (text-anchor "end", left of the plot) in the SVG whose
// aria-label is `label`.
std::vector<std::string> count_axis_labels(const std::string& html, const std::string& label) {
  const auto start = html.find("aria-label=\"" + label + "\"");
  const auto end = html.find("</svg>", start);
  std::vector<std::string> out;
  const std::string svg = html.substr(start, end - start);
  const std::string marker = "class=\"tick\" text-anchor=\"end\">";
  for (auto at = svg.find(marker); at != std::string::npos; at = svg.find(marker, at + 1)) {
    const auto b = at + marker.size();
    out.push_back(svg.substr(b, svg.find('<', b) - b));
  }
  return out;
}

// A count of units has no fractions: the Pareto's and the histogram's axes tick at whole numbers
// only, each label once (common practice, no source).
TEST(LotReport, CountAxesTickAtWholeNumbersOnly) {
  for (double top : {1.0, 2.0, 3.0, 4.0, 7.0, 12.0, 25.0, 99.0}) {
    const auto t = detail::count_ticks(top, 5);
    ASSERT_GE(t.size(), 2u) << top;
    EXPECT_EQ(t.front(), 0.0);
    EXPECT_GE(t.back(), top);
    EXPECT_LE(t.size(), 8u) << top;
    for (double v : t) EXPECT_EQ(v, std::round(v)) << "tick " << v << " for top " << top;
  }
  // Two units tuned low and one shallow (Pareto top 2); three resonances in separate bins
  // (histogram top 1): both used to tick at 0.5 or 0.2 units.
  std::vector<core::RunResult> runs = {
      testdata::make_run("U1", "L", 0, 898e6, Verdict::fail, FailureClass::tuned_low),
      testdata::make_run("U2", "L", 7, 899e6, Verdict::fail, FailureClass::tuned_low),
      testdata::make_run("U3", "L", 14, 915e6, Verdict::fail, FailureClass::shallow)};
  const std::string html = build_lot_report("L", runs, {}, {});
  for (const char* chart : {"failure classes", "resonance frequencies"}) {
    const auto labels = count_axis_labels(html, chart);
    ASSERT_GE(labels.size(), 2u) << chart;
    std::set<std::string> seen;
    for (const auto& l : labels) {
      EXPECT_EQ(l.find_first_not_of("0123456789"), std::string::npos) << chart << ": tick \"" << l << "\"";
      EXPECT_TRUE(seen.insert(l).second) << chart << ": tick " << l << " twice";
    }
  }
}

// Counts read as words: one unit is "unit", any other count (0 too) is "units" (English
// grammar, common practice, no source). The counts checked are those of the lots built here.
TEST(LotReport, OneUnitIsSingular) {
  const std::vector<core::RunResult> one = {testdata::make_run("U1", "L", 0, 915e6)};
  const std::string html = build_lot_report("L", one, {}, testdata::demo_limits());
  EXPECT_NE(html.find("<div class=\"v\">1</div><div class=\"k\">unit</div>"), std::string::npos);
  EXPECT_NE(html.find("<div class=\"v v-pass\">1</div><div class=\"k\">unit passes</div>"), std::string::npos);
  EXPECT_NE(html.find("<div class=\"v v-fail\">0</div><div class=\"k\">units fail</div>"), std::string::npos);
  EXPECT_NE(html.find("From the 1 unit this lot passed"), std::string::npos);
  EXPECT_EQ(html.find("1 units"), std::string::npos);
  EXPECT_EQ(html.find(">1</div><div class=\"k\">units"), std::string::npos);

  const std::vector<core::RunResult> two = {testdata::make_run("U1", "L", 0, 915e6),
                                            testdata::make_run("U2", "L", 7, 916e6)};
  const std::string html2 = build_lot_report("L", two, {}, testdata::demo_limits());
  EXPECT_NE(html2.find("<div class=\"v v-pass\">2</div><div class=\"k\">units pass</div>"), std::string::npos);
  EXPECT_NE(html2.find("From the 2 units this lot passed"), std::string::npos);

  // One unit whose band reaches the sweep's first point: its bandwidth is a lower bound.
  std::vector<core::RunResult> clipped = one;
  clipped[0].metrics.band_low_hz = clipped[0].points.front().frequency_hz;
  const std::string html3 = build_lot_report("L", clipped, {}, testdata::demo_limits());
  EXPECT_NE(html3.find("On this unit the band reached the end of the sweep, so its bandwidth is only a lower bound; "
                       "it is left out"),
            std::string::npos);
  // Two units, one clipped: "1 of these units ... its ... it is".
  std::vector<core::RunResult> one_of_two = two;
  one_of_two[0].metrics.band_low_hz = one_of_two[0].points.front().frequency_hz;
  const std::string html4 = build_lot_report("L", one_of_two, {}, testdata::demo_limits());
  EXPECT_NE(html4.find("On 1 of these units the band reached the end of the sweep, so its bandwidth"), std::string::npos);
}

TEST(LotReport, EmptyLotStillRenders) {
  const auto dir = testdata::temp_dir("empty");
  const auto html = build_lot_report("EMPTY", {}, {}, testdata::demo_limits());
  EXPECT_EQ(xml_errors(svgs_of(html), dir), "");
  EXPECT_NE(html.find("no calibration records given"), std::string::npos);
  std::filesystem::remove_all(dir);
}

// Writes the demo report of 240 runs to $ECHOLINE_REPORT_OUT (default: the temp dir) for
// scripts/render-report. Run with --gtest_also_run_disabled_tests.
TEST(LotReport, DISABLED_WriteDemoReport) {
  const char* env = std::getenv("ECHOLINE_REPORT_OUT");
  const std::filesystem::path out = env ? env : (std::filesystem::temp_directory_path() / "echoline-demo-lot.html");
  std::vector<core::CalibrationRecord> cals = {testdata::make_calibration("cal-0001", "2026-03-02T07:40:00.000Z")};
  ASSERT_TRUE(write_text_file(out, build_lot_report("WH915-L2407", demo_lot(240), cals, testdata::demo_limits(),
                                                     {"2026-03-02T18:00:00Z", std::nullopt})).ok());
  std::printf("[ info ] wrote %s\n", out.c_str());
}

// Timing printout (no assertion on time). Run with --gtest_also_run_disabled_tests.
TEST(LotReport, DISABLED_PrintsBuildTimeFor10000Runs) {
  const auto runs = demo_lot(10000);
  const auto t0 = std::chrono::steady_clock::now();
  const auto html = build_lot_report("WH915-BIG", runs, {}, testdata::demo_limits());
  const double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  std::printf("[ info ] lot report of %zu runs (201 points each): %.3f s, %.1f MB of HTML\n", runs.size(), s,
              html.size() / 1e6);
  EXPECT_FALSE(html.empty());
}

}  // namespace
}  // namespace echoline::store
