// Final verdicts against the truth (verdict_score.hpp).
#include "tests/score/verdict_score.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "daemon/core/decision.hpp"

namespace echoline::score {
namespace {

std::string db(double v) { return std::isinf(v) ? (v > 0 ? "+inf" : "-inf") : fmt::format("{:.2f}", v); }

std::string who(const UnitRecord& u) {
  return fmt::format("{} ({}, true f0 {:.2f} MHz)", u.run.serial, u.truth.defect.empty() ? "no defect" : u.truth.defect,
                     u.truth.f0_hz / 1e6);
}

void score_bounds(const UnitRecord& u, BoundsFigures& b) {
  const auto& pts = u.run.points;
  long outside = 0;
  double worst_here = 0;
  std::string worst_text;
  for (std::size_t i = 0; i < pts.size() && i < u.truth.rl_at_points_db.size(); ++i) {
    const core::PointResult& p = pts[i];
    const double t = u.truth.rl_at_points_db[i];
    ++b.points;
    double excursion = 0;
    if (t < p.return_loss_worst_db) excursion = p.return_loss_worst_db - t;
    else if (t > p.return_loss_best_db) excursion = t - p.return_loss_best_db;   // +inf truth above a finite best
    else continue;
    ++outside;
    const std::string text = fmt::format("{} at {:.1f} MHz: true {} dB, bounds [{}, {}] dB", u.run.serial,
                                         p.frequency_hz / 1e6, db(t), db(p.return_loss_worst_db),
                                         db(p.return_loss_best_db));
    if (excursion > worst_here || worst_text.empty()) {
      worst_here = excursion;
      worst_text = text;
    }
    if (excursion > b.largest_excursion_db || b.largest_at.empty()) {
      b.largest_excursion_db = excursion;
      b.largest_at = text;
    }
  }
  if (outside > 0) {
    b.outside += outside;
    b.runs.push_back(fmt::format("{}: {} point(s) outside, largest {} dB ({})", who(u), outside, db(worst_here), worst_text));
  }
}

bool length_defect(const UnitTruth& t, const TuningBand& band) {
  if (t.defect == "too-long" || t.defect == "too-short") return true;
  // A good unit tuned outside the band: its length is what is wrong.
  return t.defect.empty() && (t.f0_hz < band.low_hz || t.f0_hz > band.high_hz);
}

}  // namespace

TuningBand tuning_band(const core::Recipe& recipe) {
  if (recipe.limits.resonance_min_hz && recipe.limits.resonance_max_hz) {
    return {*recipe.limits.resonance_min_hz, *recipe.limits.resonance_max_hz};
  }
  TuningBand b{std::numeric_limits<double>::infinity(), -std::numeric_limits<double>::infinity()};
  for (const auto& s : recipe.limits.mask) {
    b.low_hz = std::min(b.low_hz, s.start_hz);
    b.high_hz = std::max(b.high_hz, s.stop_hz);
  }
  return b;
}

bool truth_meets_limits(const UnitTruth& truth, const core::Recipe& recipe, std::string* why) {
  for (const MaskTruth& m : truth.mask) {
    if (!m.met) {
      if (why) {
        *why = fmt::format("true RL {} dB at {:.1f} MHz, below the {} dB limit over {:.0f}-{:.0f} MHz", db(m.lowest_rl_db),
                           m.lowest_at_hz / 1e6, m.segment.min_return_loss_db, m.segment.start_hz / 1e6,
                           m.segment.stop_hz / 1e6);
      }
      return false;
    }
  }
  if (recipe.limits.resonance_min_hz && recipe.limits.resonance_max_hz &&
      !(truth.f0_hz >= *recipe.limits.resonance_min_hz && truth.f0_hz <= *recipe.limits.resonance_max_hz)) {
    if (why) {
      *why = fmt::format("true f0 {:.2f} MHz outside the {:.0f}-{:.0f} MHz window", truth.f0_hz / 1e6,
                         *recipe.limits.resonance_min_hz / 1e6, *recipe.limits.resonance_max_hz / 1e6);
    }
    return false;
  }
  return true;
}

std::string first_characters(const std::string& text, std::size_t n) {
  std::size_t i = 0, count = 0;
  while (i < text.size() && count < n) {
    const auto c = static_cast<unsigned char>(text[i]);
    i += c < 0x80 ? 1 : (c >> 5) == 0x6 ? 2 : (c >> 4) == 0xE ? 3 : (c >> 3) == 0x1E ? 4 : 1;
    ++count;
  }
  return text.substr(0, std::min(i, text.size()));
}

VerdictFigures score_verdicts(const std::vector<UnitRecord>& units, const core::Recipe& recipe) {
  VerdictFigures f;
  const TuningBand band = tuning_band(recipe);
  for (const UnitRecord& u : units) {
    ++f.units;
    const core::Verdict v = u.run.verdict;
    ++f.verdicts[core::to_string(v)];
    const bool intermittent = u.truth.defect == "intermittent";
    if (v != core::Verdict::aborted) score_bounds(u, intermittent ? f.bounds_intermittent : f.bounds);

    std::string miss;
    const bool truth_ok = truth_meets_limits(u.truth, recipe, &miss);
    if (v == core::Verdict::pass && !truth_ok) f.escapes.push_back(who(u) + ": passed, but " + miss);
    if (v == core::Verdict::fail && truth_ok) {
      (intermittent ? f.intermittent_failed : f.false_rejects).push_back(who(u) + ": " + u.run.reason);
    } else if (v == core::Verdict::fail && intermittent) {
      f.intermittent_failed.push_back(who(u) + ": " + u.run.reason);
    }
    if (v == core::Verdict::inconclusive) {
      ++f.inconclusive;
      ++f.inconclusive_reasons[first_characters(u.run.reason, 60)];
      if (u.run.reason.find(core::kRetestCannotSettle) != std::string::npos) ++f.inconclusive_systematic;
      f.inconclusive_units.push_back(who(u) + ": " + u.run.reason);
    }
    if (u.run.trim) {
      ++f.trim_advised;
      if (!length_defect(u.truth, band)) f.trim_on_non_length.push_back(who(u) + ": " + u.run.trim->text);
    }
  }
  return f;
}

}  // namespace echoline::score
