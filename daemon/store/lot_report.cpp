// The HTML lot report: page layout, CSS, and the SVG charts (overlay, Pareto, histogram, per unit).
// Colours are the project's own: green-grey pass, brick fail, ochre inconclusive, slate aborted.
#include "daemon/store/lot_report.hpp"
#include "daemon/store/nominal_from_lot.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <set>

#include "daemon/store/station_compare.hpp"
#include "daemon/store/svg_plot.hpp"

namespace echoline::store {

using detail::fixed;
using detail::Frame;
using detail::Scale;

std::string html_escape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (const char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default:
        // Control characters other than tab/newline are not allowed in XML 1.0: show a replacement.
        if (static_cast<unsigned char>(c) < 0x20 && c != '\t' && c != '\n') out += "\xEF\xBF\xBD";
        else out += c;
    }
  }
  return out;
}

namespace {

constexpr const char* kCss = R"css(
body{font-family:"DejaVu Sans",Helvetica,Arial,sans-serif;margin:24px 32px;color:#1d2430;background:#fbfbf8;max-width:1200px}
h1{font-size:26px;margin:0 0 4px 0} h3{font-size:15px;margin:16px 0 6px 0} tr.drift td{background:#f6e3d8} h2{font-size:18px;margin:28px 0 8px 0;border-bottom:2px solid #d6d3c4;padding-bottom:3px}
.meta{color:#4a5363;font-size:13px;margin-bottom:12px} .meta b{color:#1d2430}
.cards{display:flex;gap:12px;flex-wrap:wrap} .card{border:1px solid #d6d3c4;border-radius:6px;padding:8px 14px;background:#fff;min-width:110px}
.card .v{font-size:24px;font-weight:bold} .card .k{font-size:12px;color:#4a5363}
table{border-collapse:collapse;font-size:12.5px;background:#fff} td,th{border:1px solid #d6d3c4;padding:3px 7px;text-align:left;vertical-align:top}
th{background:#efeee6} td.n{text-align:right;font-variant-numeric:tabular-nums}
.v-pass{color:#3f7d4e;font-weight:bold} .v-fail{color:#a8412c;font-weight:bold} .v-inconclusive{color:#9a7412;font-weight:bold} .v-aborted{color:#5d6475;font-weight:bold}
svg{background:#fff;border:1px solid #d6d3c4;display:block;margin:6px 0}
svg text{font-family:"DejaVu Sans",Helvetica,Arial,sans-serif}
.plotbg{fill:#fff} .frame{fill:none;stroke:#5d6475;stroke-width:1} .grid{stroke:#e7e5dc;stroke-width:1}
.tick{font-size:11px;fill:#4a5363} .axis{font-size:12px;fill:#1d2430} .note{font-size:11px;fill:#1d2430}
.trace{fill:none;stroke-width:1;stroke-linejoin:round}
.trace.pass{stroke:#5e9a6b;stroke-opacity:.35} .trace.fail{stroke:#b9472f;stroke-opacity:.9}
.trace.inconclusive{stroke:#c69a1d;stroke-opacity:.95} .trace.aborted{stroke:#7b8190;stroke-opacity:.8;stroke-dasharray:3 2}
.band{fill:#7d8fb3;fill-opacity:.22;stroke:none} .window{fill:#7d8fb3;fill-opacity:.12;stroke:#4d5f86;stroke-dasharray:5 3}
.limit{stroke:#1d2430;stroke-width:2.2} .bar{fill:#a8412c} .hbar{fill:#8aa3c8;stroke:#4d5f86;stroke-width:.5}
.cum{fill:none;stroke:#1d2430;stroke-width:1.5} .mean{stroke:#1d2430;stroke-width:1.5;stroke-dasharray:2 2}
.spec{stroke:#4d5f86;stroke-width:2}
.legend rect{stroke:none} .small{font-size:12px;color:#4a5363}
.notice{border:2px solid #a8412c;background:#f6e3d8;padding:6px 12px;margin:10px 0;font-size:13.5px}
)css";

const char* verdict_css(core::Verdict v) { return core::to_string(v); }

std::string mhz(double hz, int decimals = 3) { return fixed(hz / 1e6, decimals); }

struct FreqRange { double lo = 0, hi = 0; bool any = false; };

void widen(FreqRange& r, double f) {
  if (!std::isfinite(f)) return;
  if (!r.any) { r.lo = r.hi = f; r.any = true; return; }
  r.lo = std::min(r.lo, f);
  r.hi = std::max(r.hi, f);
}

// Limit segments and resonance window drawn inside a frame (RL axis grows downwards).
std::string limits_svg(const Frame& f, const core::Limits& limits, double y_max) {
  std::string s;
  if (limits.resonance_min_hz && limits.resonance_max_hz) {
    const double x0 = f.x(std::max(*limits.resonance_min_hz, f.x.lo)), x1 = f.x(std::min(*limits.resonance_max_hz, f.x.hi));
    if (x1 > x0) {
      s += fmt::format("<rect x=\"{:.1f}\" y=\"{}\" width=\"{:.1f}\" height=\"{}\" class=\"window\"/>\n", x0, f.top,
                       x1 - x0, f.height);
      s += fmt::format("<text x=\"{:.1f}\" y=\"{}\" class=\"note\" text-anchor=\"middle\">resonance window</text>\n",
                       (x0 + x1) / 2, f.top + 13);
    }
  }
  for (const auto& seg : limits.mask) {
    const double v = std::min(seg.min_return_loss_db, y_max);
    const double x0 = f.x(std::max(seg.start_hz, f.x.lo)), x1 = f.x(std::min(seg.stop_hz, f.x.hi));
    if (x1 <= x0) continue;
    s += fmt::format("<line x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" class=\"limit\"/>\n", x0, f.y(v), x1, f.y(v));
    s += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" class=\"note\">≥ {} dB</text>\n", x0 + 3, f.y(v) + 13,
                     fixed(seg.min_return_loss_db, 1));
  }
  return s;
}

std::vector<double> column(const core::RunResult& r, double core::PointResult::*m) {
  std::vector<double> v;
  v.reserve(r.points.size());
  for (const auto& p : r.points) v.push_back(p.*m);
  return v;
}

// Frequency and RL ranges over runs and limits.
void ranges(const std::vector<const core::RunResult*>& runs, const core::Limits& limits, FreqRange& fr, double& y_max) {
  y_max = 10;
  for (const auto* r : runs) {
    for (const auto& p : r->points) {
      widen(fr, p.frequency_hz);
      if (std::isfinite(p.return_loss_db)) y_max = std::max(y_max, p.return_loss_db);
    }
  }
  for (const auto& seg : limits.mask) {
    widen(fr, seg.start_hz);
    widen(fr, seg.stop_hz);
    y_max = std::max(y_max, seg.min_return_loss_db + 3);
  }
  if (limits.resonance_min_hz) widen(fr, *limits.resonance_min_hz);
  if (limits.resonance_max_hz) widen(fr, *limits.resonance_max_hz);
  if (!fr.any) { fr.lo = 0; fr.hi = 1e6; }
  if (fr.hi <= fr.lo) { fr.lo -= 0.5e6; fr.hi += 0.5e6; }
  y_max = std::min(y_max * 1.05, 60.0);
}

std::string overlay_svg(const std::vector<core::RunResult>& runs, const std::vector<std::size_t>& finals,
                        const core::Limits& limits) {
  std::vector<const core::RunResult*> shown;
  for (std::size_t i : finals) shown.push_back(&runs[i]);
  FreqRange fr;
  double y_max = 0;
  ranges(shown, limits, fr, y_max);
  double ylo = 0, yhi = y_max;
  detail::nice_range(ylo, yhi, 8);
  const int W = 1130, H = 470;
  Frame f{70, 20, W - 100.0, H - 80.0, Scale{fr.lo, fr.hi, 70, W - 30.0}, Scale{0, yhi, 20, H - 60.0}};
  std::string s = fmt::format("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{0}\" height=\"{1}\" viewBox=\"0 0 {0} {1}\" "
                              "role=\"img\" aria-label=\"return loss of every unit\">\n", W, H);
  s += detail::frame_svg(f, "frequency (MHz)", "return loss (dB), larger is better ↓", 1e6);
  s += limits_svg(f, limits, yhi);
  // Draw passes first so fails and inconclusives stay on top.
  for (auto v : {core::Verdict::pass, core::Verdict::aborted, core::Verdict::inconclusive, core::Verdict::fail}) {
    for (const auto* r : shown) {
      if (r->verdict != v) continue;
      const auto d = detail::path_data(f.x, f.y, column(*r, &core::PointResult::frequency_hz),
                                       column(*r, &core::PointResult::return_loss_db), 0, yhi);
      s += fmt::format("<path class=\"trace {}\" d=\"{}\"><title>{}</title></path>\n", verdict_css(v), d,
                       html_escape(r->serial));
    }
  }
  // Legend.
  double lx = f.left + f.width - 150;
  s += "<g class=\"legend\">";
  int k = 0;
  for (auto v : {core::Verdict::pass, core::Verdict::inconclusive, core::Verdict::fail, core::Verdict::aborted}) {
    const double ly = f.top + f.height - 78 + 18 * k++;
    s += fmt::format("<rect x=\"{:.1f}\" y=\"{:.1f}\" width=\"140\" height=\"18\" fill=\"#fff\" fill-opacity=\".85\"/>", lx - 4, ly - 12);
    s += fmt::format("<line x1=\"{:.1f}\" y1=\"{:.1f}\" x2=\"{:.1f}\" y2=\"{:.1f}\" class=\"trace {}\" style=\"stroke-width:3;stroke-opacity:1\"/>",
                     lx, ly - 4, lx + 24, ly - 4, verdict_css(v));
    s += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" class=\"note\">{}</text>", lx + 30, ly, core::to_string(v));
  }
  s += "</g>\n</svg>\n";
  return s;
}

std::string pareto_svg(const LotStats& st) {
  const int W = 560, H = 300;
  std::string s = fmt::format("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{0}\" height=\"{1}\" viewBox=\"0 0 {0} {1}\" "
                              "role=\"img\" aria-label=\"failure classes\">\n", W, H);
  if (st.pareto.empty()) {
    s += "<text x=\"20\" y=\"40\" class=\"axis\">no failed or inconclusive units</text>\n</svg>\n";
    return s;
  }
  int total = 0, top = 0;
  for (const auto& [c, n] : st.pareto) { total += n; top = std::max(top, n); }
  const std::vector<double> ticks = detail::count_ticks(top, 5);   // whole units only
  const double yhi = ticks.back();
  const double left = 60, plot_top = 20, w = W - 120.0, h = H - 90.0;
  Frame f{left, plot_top, w, h, Scale{0, 1, left, left + w}, Scale{0, yhi, plot_top + h, plot_top}};
  // Frame without x ticks: draw y grid manually via frame_svg on a dummy x range, then bars.
  s += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" class=\"plotbg\"/>\n", left, plot_top, w, h);
  for (double t : ticks) {
    s += fmt::format("<line x1=\"{0}\" y1=\"{1:.1f}\" x2=\"{2}\" y2=\"{1:.1f}\" class=\"grid\"/>", left, f.y(t), left + w);
    s += fmt::format("<text x=\"{}\" y=\"{:.1f}\" class=\"tick\" text-anchor=\"end\">{}</text>\n", left - 6, f.y(t) + 4, fixed(t, 0));
  }
  const double slot = w / static_cast<double>(st.pareto.size());
  std::string cum_d;
  int cum = 0;
  for (std::size_t i = 0; i < st.pareto.size(); ++i) {
    const auto& [name, n] = st.pareto[i];
    const double x = left + slot * static_cast<double>(i) + slot * 0.15, bw = slot * 0.7;
    s += fmt::format("<rect x=\"{:.1f}\" y=\"{:.1f}\" width=\"{:.1f}\" height=\"{:.1f}\" class=\"bar\"/>", x, f.y(n), bw,
                     f.y(0) - f.y(n));
    s += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" class=\"note\" text-anchor=\"middle\">{}</text>", x + bw / 2, f.y(n) - 4, n);
    s += fmt::format("<text x=\"{:.1f}\" y=\"{:.1f}\" class=\"tick\" text-anchor=\"middle\">{}</text>\n", x + bw / 2,
                     plot_top + h + 16, html_escape(name));
    cum += n;
    const double cy = plot_top + h - h * cum / static_cast<double>(total);
    cum_d += fmt::format("{}{:.1f},{:.1f}", cum_d.empty() ? "M" : " L", x + bw / 2, cy);
  }
  s += fmt::format("<path d=\"{}\" class=\"cum\"/>\n", cum_d);
  for (int p = 0; p <= 100; p += 25) {
    const double py = plot_top + h - h * p / 100.0;
    s += fmt::format("<text x=\"{}\" y=\"{:.1f}\" class=\"tick\">{}%</text>", left + w + 6, py + 4, p);
  }
  s += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" class=\"frame\"/>\n", left, plot_top, w, h);
  s += fmt::format("<text x=\"{:.1f}\" y=\"{}\" class=\"axis\" text-anchor=\"middle\">failure class (final run of each unit)</text>\n",
                   left + w / 2, H - 30);
  s += fmt::format("<text x=\"18\" y=\"{0:.1f}\" class=\"axis\" text-anchor=\"middle\" transform=\"rotate(-90 18 {0:.1f})\">units</text>\n",
                   plot_top + h / 2);
  s += fmt::format("<text x=\"{0}\" y=\"{1:.1f}\" class=\"axis\" text-anchor=\"middle\" transform=\"rotate(90 {0} {1:.1f})\">cumulative share</text>\n",
                   W - 14, plot_top + h / 2);
  s += "</svg>\n";
  return s;
}

std::string histogram_svg(const LotStats& st, const core::Limits& limits) {
  const int W = 560, H = 300;
  std::string s = fmt::format("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{0}\" height=\"{1}\" viewBox=\"0 0 {0} {1}\" "
                              "role=\"img\" aria-label=\"resonance frequencies\">\n", W, H);
  if (st.resonances_hz.empty()) {
    s += "<text x=\"20\" y=\"40\" class=\"axis\">no unit has a resonance to show</text>\n</svg>\n";
    return s;
  }
  FreqRange fr;
  for (double v : st.resonances_hz) widen(fr, v);
  if (limits.resonance_min_hz) widen(fr, *limits.resonance_min_hz);
  if (limits.resonance_max_hz) widen(fr, *limits.resonance_max_hz);
  double lo = fr.lo, hi = fr.hi;
  if (hi - lo < 1e3) { lo -= 0.5e6; hi += 0.5e6; }
  const double pad = (hi - lo) * 0.05;
  lo -= pad;
  hi += pad;
  const int bins = 30;
  const double bw = (hi - lo) / bins;
  std::vector<int> counts(bins, 0);
  for (double v : st.resonances_hz) counts[std::clamp(static_cast<int>((v - lo) / bw), 0, bins - 1)]++;
  const double yhi = detail::count_ticks(*std::max_element(counts.begin(), counts.end()), 5).back();
  Frame f{60, 34, W - 90.0, H - 94.0, Scale{lo, hi, 60, W - 30.0}, Scale{0, yhi, H - 60.0, 34}};
  s += detail::frame_svg(f, "resonance frequency (MHz)", "units", 1e6, 6, 5, /*y_counts=*/true);
  for (int b = 0; b < bins; ++b) {
    if (!counts[b]) continue;
    const double x0 = f.x(lo + b * bw), x1 = f.x(lo + (b + 1) * bw);
    s += fmt::format("<rect x=\"{:.1f}\" y=\"{:.1f}\" width=\"{:.1f}\" height=\"{:.1f}\" class=\"hbar\"/>", x0, f.y(counts[b]),
                     x1 - x0, f.y(0) - f.y(counts[b]));
  }
  s += "\n";
  auto vline = [&](double hz, const char* cls, const std::string& label) {
    const double x = f.x(hz);
    s += fmt::format("<line x1=\"{0:.1f}\" y1=\"{1}\" x2=\"{0:.1f}\" y2=\"{2}\" class=\"{3}\"/>", x, f.top, f.top + f.height, cls);
    s += fmt::format("<text x=\"{:.1f}\" y=\"{}\" class=\"note\" text-anchor=\"middle\">{}</text>\n", x, f.top - 4, label);
  };
  if (limits.resonance_min_hz) vline(*limits.resonance_min_hz, "spec", "LSL " + mhz(*limits.resonance_min_hz, 1));
  if (limits.resonance_max_hz) vline(*limits.resonance_max_hz, "spec", "USL " + mhz(*limits.resonance_max_hz, 1));
  if (st.mean_hz) vline(*st.mean_hz, "mean", "mean");
  std::string stats = fmt::format("n = {}", st.resonances_hz.size());
  if (st.resonances_left_out > 0) {
    stats += fmt::format(" ({} left out: no dip, or the maximum at the sweep's end)", st.resonances_left_out);
  }
  if (st.mean_hz) stats += fmt::format("   mean = {} MHz", mhz(*st.mean_hz));
  if (st.stddev_hz) stats += fmt::format("   σ = {} MHz", mhz(*st.stddev_hz));
  stats += st.cpk ? fmt::format("   Cpk = {}", fixed(*st.cpk, 2)) : std::string("   Cpk: n/a");
  s += fmt::format("<text x=\"{}\" y=\"14\" class=\"axis\">{}</text>\n", f.left, stats);
  s += "</svg>\n";
  return s;
}

std::string cell_num(const std::optional<double>& v, double scale, int decimals) {
  return v && std::isfinite(*v) ? fixed(*v / scale, decimals) : std::string("–");
}

}  // namespace

std::string unit_trace_svg(const core::RunResult& run, const core::Limits& limits, int width, int height) {
  FreqRange fr;
  double y_max = 0;
  ranges({&run}, limits, fr, y_max);
  double ylo = 0, yhi = y_max;
  detail::nice_range(ylo, yhi, 4);
  const double W = width, H = height;
  Frame f{56, 12, W - 70, H - 56, Scale{fr.lo, fr.hi, 56, W - 14}, Scale{0, yhi, 12, H - 44}};
  std::string s = fmt::format("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{0}\" height=\"{1}\" viewBox=\"0 0 {0} {1}\" "
                              "role=\"img\" aria-label=\"return loss of {2}\">\n", width, height, html_escape(run.serial));
  s += "<style>.plotbg{fill:#fff}.frame{fill:none;stroke:#5d6475}.grid{stroke:#e7e5dc}.tick{font-size:10px;fill:#4a5363}"
       ".axis{font-size:11px;fill:#1d2430}.note{font-size:10px;fill:#1d2430}.band{fill:#7d8fb3;fill-opacity:.25}"
       ".window{fill:#7d8fb3;fill-opacity:.12;stroke:#4d5f86;stroke-dasharray:5 3}.limit{stroke:#1d2430;stroke-width:2}"
       ".trace{fill:none;stroke-width:1.5}.trace.pass{stroke:#3f7d4e}.trace.fail{stroke:#a8412c}"
       ".trace.inconclusive{stroke:#9a7412}.trace.aborted{stroke:#5d6475;stroke-dasharray:3 2}</style>\n";
  s += detail::frame_svg(f, "frequency (MHz)", "RL (dB) ↓", 1e6, 5, 4);
  s += limits_svg(f, limits, yhi);
  // Bounds band: worst (lower RL) to best (higher RL, clamped where unbounded).
  const auto fx = column(run, &core::PointResult::frequency_hz);
  std::string band;
  for (std::size_t i = 0; i < run.points.size(); ++i) {
    const double v = std::clamp(run.points[i].return_loss_worst_db, 0.0, yhi);
    band += fmt::format("{}{:.1f},{:.1f}", band.empty() ? "M" : " L", f.x(fx[i]), f.y(v));
  }
  for (std::size_t i = run.points.size(); i-- > 0;) {
    double b = run.points[i].return_loss_best_db;
    if (!std::isfinite(b)) b = yhi;
    band += fmt::format(" L{:.1f},{:.1f}", f.x(fx[i]), f.y(std::clamp(b, 0.0, yhi)));
  }
  if (!band.empty()) s += fmt::format("<path class=\"band\" d=\"{} Z\"/>\n", band);
  s += fmt::format("<path class=\"trace {}\" d=\"{}\"/>\n", verdict_css(run.verdict),
                   detail::path_data(f.x, f.y, fx, column(run, &core::PointResult::return_loss_db), 0, yhi));
  s += "</svg>\n";
  return s;
}

namespace {

std::string opt_cell(const std::optional<double>& v, double scale, int digits, bool sign = false) {
  if (!v || !std::isfinite(*v)) return "–";
  const std::string text = fixed(*v / scale, digits);
  return sign && *v > 0 ? "+" + text : text;
}

// "unit" for one, "units" for any other count (none too).
const char* units_word(int n) { return n == 1 ? "unit" : "units"; }

// A verdict card's words under its count: "unit passes" for one, "units pass" otherwise.
std::string verdict_card_words(std::string_view verdict, int n) {
  const bool one = n == 1;
  if (verdict == "pass") return one ? "unit passes" : "units pass";
  if (verdict == "fail") return one ? "unit fails" : "units fail";
  return fmt::format("{} {}", units_word(n), verdict);   // inconclusive, aborted
}

std::string group_table(const char* title, const std::vector<GroupYield>& groups, bool stations) {
  std::string h = fmt::format("<h3>{}</h3>\n<table>\n<tr><th>{}</th><th>units</th><th>finished runs</th><th>passed</th>"
                              "<th>run yield</th><th>retests from another bench</th><th>mean resonance (MHz)</th>"
                              "<th>σ (MHz)</th><th>mean return loss at resonance (dB)</th><th>σ (dB)</th>",
                              title, title);
  if (stations) h += "<th>resonance vs other stations (MHz)</th><th>z</th><th>return loss vs others (dB)</th><th>z</th>";
  h += "</tr>\n";
  for (const auto& g : groups) {
    h += fmt::format("<tr{}><td>{}{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>"
                     "<td class=\"n\">{}%</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>"
                     "<td class=\"n\">{}</td><td class=\"n\">{}</td>",
                     g.stands_out ? " class=\"drift\"" : "", html_escape(g.key), g.stands_out ? " <b>(stands out)</b>" : "",
                     g.units, g.finished_runs, g.passed_runs, fixed(100 * g.run_yield, 1), g.retests_other_bench,
                     opt_cell(g.resonance_hz.mean, 1e6, 3), opt_cell(g.resonance_hz.sd, 1e6, 3),
                     opt_cell(g.depth_db.mean, 1, 2), opt_cell(g.depth_db.sd, 1, 2));
    if (stations) {
      h += fmt::format("<td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>",
                       opt_cell(g.resonance_diff_hz, 1e6, 3, true), opt_cell(g.resonance_z, 1, 1, true),
                       opt_cell(g.depth_diff_db, 1, 2, true), opt_cell(g.depth_z, 1, 1, true));
    }
    h += "</tr>\n";
  }
  return h + "</table>\n";
}

// Only for a lot tested on more than one station.
std::string stations_section(const std::vector<core::RunResult>& runs) {
  const StationComparison c = compare_stations(runs);
  if (c.by_station.size() < 2) return {};
  std::string h = "<h2>Stations</h2>\n";
  h += group_table("station", c.by_station, true);
  h += group_table("operator", c.by_operator, false);
  h += group_table("calibration", c.by_calibration, false);
  h += "<p class=\"small\">Finished runs only (aborted runs left out); run yield = passed runs / finished runs, retests "
       "included. A retest from another bench is a run of a unit whose first finished run was on another station. "
       "Each station's means are compared with the runs of every other station; z is the difference over its standard "
       "error (Welch), and a station with |z| &gt; 3 on resonance or return loss stands out: look at its fixture, "
       "cable and calibration.</p>\n";
  return h;
}

// The recipe versions the runs used, each with its runs, units and whether its limits are known.
std::string recipes_section(const LotRecipes& r) {
  std::string h = "<h2>Recipes</h2>\n<table>\n<tr><th>recipe</th><th>version</th><th>content hash</th><th>runs</th>"
                  "<th>units (latest run)</th><th>first run</th><th>last run</th><th>limits</th></tr>\n";
  for (const auto& v : r.versions) {
    const std::string limits = !v.problem.empty() ? "<b>unknown</b>: " + html_escape(v.problem)
                               : v.from_local     ? std::string("from the local recipe file (same content)")
                                                  : std::string("stored with the runs");
    h += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td>"
                     "<td>{}</td><td>{}</td></tr>\n",
                     html_escape(v.name), html_escape(v.version), html_escape(v.content_hash), v.runs, v.units,
                     html_escape(v.first_started_utc), html_escape(v.last_started_utc), limits);
  }
  h += "</table>\n";
  h += fmt::format("<p class=\"small\">Limit lines and the Cpk window: {}. Verdicts are as each run stored them.</p>\n",
                   html_escape(r.drawn_from));
  return h;
}

}  // namespace

std::string build_lot_report(std::string_view lot, const std::vector<core::RunResult>& runs,
                             const std::vector<core::CalibrationRecord>& calibrations, const core::Limits& limits,
                             const LotReportOptions& options) {
  const LotStats st = compute_lot_stats(runs, limits);
  const auto finals = final_runs(runs);
  std::set<std::string> recipes, stations, cal_ids;
  std::map<std::string, int> cal_use;
  for (const auto& r : runs) {
    recipes.insert(r.recipe.name + (r.recipe.version.empty() ? "" : " v" + r.recipe.version));
    stations.insert(r.station);
    if (!r.calibration_id.empty()) ++cal_use[r.calibration_id];
  }
  auto join = [](const std::set<std::string>& v) {
    std::string out;
    for (const auto& x : v) out += (out.empty() ? "" : ", ") + html_escape(x);
    return out.empty() ? std::string("–") : out;
  };
  const std::string lot_e = html_escape(lot);
  std::string h;
  h.reserve(runs.size() * 2200 + 20000);
  h += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  h += fmt::format("<title>Lot {} – Echoline lot report</title>\n<style>{}</style>\n</head>\n<body>\n", lot_e, kCss);
  h += fmt::format("<h1>Lot {}</h1>\n", lot_e);
  h += fmt::format("<div class=\"meta\">recipe <b>{}</b> · station <b>{}</b> · first run <b>{}</b> · last run <b>{}</b>{}</div>\n",
                   join(recipes), join(stations), html_escape(st.first_started_utc.empty() ? "–" : st.first_started_utc),
                   html_escape(st.last_started_utc.empty() ? "–" : st.last_started_utc),
                   options.generated_utc.empty() ? "" : " · generated " + html_escape(options.generated_utc));

  if (options.recipes) {
    for (const auto& note : options.recipes->notes) h += "<p class=\"notice\">" + html_escape(note) + "</p>\n";
  }

  h += "<h2>Yield</h2>\n<div class=\"cards\">\n";
  h += fmt::format("<div class=\"card\"><div class=\"v\">{}</div><div class=\"k\">{}</div></div>\n", st.units,
                   units_word(st.units));
  h += fmt::format("<div class=\"card\"><div class=\"v\">{}%</div><div class=\"k\">final yield (units whose latest judged run passed)</div></div>\n",
                   fixed(100 * st.final_yield, 1));
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    const int n = st.units_by_final_verdict.at(v);
    h += fmt::format("<div class=\"card\"><div class=\"v v-{0}\">{1}</div><div class=\"k\">{2}</div></div>\n", v, n,
                     verdict_card_words(v, n));
  }
  h += "</div>\n<p class=\"small\">Runs (retests included): ";
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    h += fmt::format("<span class=\"v-{0}\">{0}</span> {1} &#160; ", v, st.runs_by_verdict.at(v));
  }
  h += fmt::format("total {}.</p>\n", st.runs);

  h += "<div style=\"display:flex;gap:16px;flex-wrap:wrap\">\n<div>\n<h2>Failure classes</h2>\n";
  h += pareto_svg(st);
  h += "</div>\n<div>\n<h2>Resonance frequency</h2>\n";
  h += histogram_svg(st, limits);
  h += "</div>\n</div>\n";

  {
    // What this lot says about the nominal unit, for the recipe's predictions (recipe check).
    const NominalFromLot nominal = nominal_from_lot(runs);
    if (!nominal.snippet.empty()) {
      h += "<h2>Nominal unit for the recipe</h2>\n";
      h += fmt::format("<p class=\"small\">From the {} {} this lot passed or left undecided. With it in the recipe, "
                       "<code>echoline recipe check</code> predicts how many units the mask and the resonance window "
                       "will leave undecided on a station. The resonance centre is left out: a scalar bench reads every "
                       "resonance shifted by its own coupler leakage, so this lot's mean is the bench's, not the "
                       "units'; the trim target stands for it.</p>\n<pre>{}</pre>\n",
                       nominal.units, units_word(nominal.units), html_escape(nominal.snippet));
      if (nominal.bandwidth_clipped > 0) {
        const bool one = nominal.bandwidth_clipped == 1;
        h += fmt::format("<p class=\"small\">On {} the band reached the end of the sweep, so {} "
                         "bandwidth is only a lower bound; {} left out of the bandwidth{}.</p>\n",
                         nominal.units == 1 ? std::string("this unit")
                                            : fmt::format("{} of these units", nominal.bandwidth_clipped),
                         one ? "its" : "their", one ? "it is" : "they are",
                         nominal.bandwidth_hz ? "" : ", which is therefore not given: widen the sweep to measure it");
      }
    }
  }

  h += "<h2>Return loss of every unit (latest run)</h2>\n";
  h += overlay_svg(runs, finals, limits);
  h += "<p class=\"small\">Limit lines show the minimum return loss each segment requires; a trace must lie below a line "
       "(more return loss) to meet it. The shaded band is the resonance window.</p>\n";

  h += stations_section(runs);
  if (options.recipes) h += recipes_section(*options.recipes);

  h += "<h2>Calibrations</h2>\n<table>\n<tr><th>id</th><th>created (UTC)</th><th>station</th><th>recipe</th>"
       "<th>min directivity (dB)</th><th>valid</th><th>runs in this lot</th><th>warnings</th></tr>\n";
  for (const auto& c : calibrations) {
    std::string warn;
    for (const auto& w : c.warnings) warn += (warn.empty() ? "" : "<br>") + html_escape(w);
    h += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td>{}</td><td class=\"n\">{}</td><td>{}</td></tr>\n",
                     html_escape(c.id), html_escape(c.created_utc), html_escape(c.station),
                     html_escape(c.recipe.name + " " + c.recipe.version), fixed(c.min_directivity_db, 1),
                     c.valid ? "yes" : "<b>no</b>", cal_use.count(c.id) ? cal_use.at(c.id) : 0, warn.empty() ? "–" : warn);
  }
  if (calibrations.empty()) h += "<tr><td colspan=\"8\">no calibration records given</td></tr>\n";
  h += "</table>\n";

  h += "<h2>Units that did not pass (latest run)</h2>\n<table>\n<tr><th>serial</th><th>verdict</th><th>class</th>"
       "<th>resonance (MHz)</th><th>depth (dB)</th><th>reason</th><th>trim advice</th><th>run</th><th>started (UTC)</th></tr>\n";
  int listed = 0;
  for (auto v : {core::Verdict::fail, core::Verdict::inconclusive, core::Verdict::aborted}) {
    for (std::size_t i : finals) {
      const auto& r = runs[i];
      if (r.verdict != v) continue;
      ++listed;
      h += fmt::format("<tr><td>{}</td><td class=\"v-{}\">{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>"
                       "<td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                       html_escape(r.serial), verdict_css(v), core::to_string(v), html_escape(core::to_string(r.failure_class)),
                       cell_num(r.metrics.resonance_hz, 1e6, 3),
                       std::isfinite(r.metrics.depth_db) ? fixed(r.metrics.depth_db, 1) : "–", html_escape(r.reason),
                       r.trim ? html_escape(r.trim->text) : "–", html_escape(r.run_id), html_escape(r.started_utc));
    }
  }
  if (!listed) h += "<tr><td colspan=\"9\">every unit passed</td></tr>\n";
  h += "</table>\n";
  h += "<p class=\"small\">Echoline lot report. Resonance statistics use each unit's latest finished run; σ is the sample "
       "standard deviation; Cpk = min(USL − mean, mean − LSL) / 3σ with the recipe's resonance window as LSL/USL.</p>\n";
  h += "</body>\n</html>\n";
  return h;
}

}  // namespace echoline::store
