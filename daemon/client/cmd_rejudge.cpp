// echoline rejudge: judges a lot's stored runs again offline, from a run store file opened
// read-only, each from its raw readings and its own calibration: once with the resonance
// intervals of the points alone and once with the dip fit, under the runs' own recipe or
// another recipe's limits, and prints the comparison. Nothing is written. Edge code; one thread.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <iostream>
#include <map>
#include <memory>
#include <set>
#include <vector>

#include <fmt/format.h>

#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/core/calibration.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/judge.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/run_store.hpp"

namespace echoline::client {
namespace {

constexpr const char* kRejudgeHelp =
    "usage: echoline rejudge --store FILE --lot LOT [--recipe FILE] [--list N]\n\n"
    "Judges every unit's final stored run of the lot again, offline, from its raw readings and the\n"
    "calibration it was measured with, twice: with the resonance intervals the points alone give\n"
    "(as the station judged before the dip fit existed) and with the dip fit, which narrows the\n"
    "resonance interval only when a unit model passes its goodness-of-fit test. By default each\n"
    "run is judged under its own recipe as stored; --recipe FILE judges under that recipe's limits\n"
    "instead. That recipe must sweep the points the runs were measured at: a run measured at other\n"
    "points is listed as not re-judged, and a recipe that fits none of the lot's runs is refused\n"
    "(exit 2). Prints the verdicts stored and re-judged, the units\n"
    "whose verdict the fit changes (up to --list N, default 20), the median resonance-interval\n"
    "half-widths, which interval decided each unit's (rigorous, shift-bound, offset-pair or fit)\n"
    "and why the fit was refused. The store is opened read-only; nothing is written.\n\n"
    "Compare the two columns on a whole lot before switching a line over to the fit.\n\n"
    "exit: 0 compared, 1 no runs for the lot, 2 usage or recipe error, 5 the store could not be read\n";

double median(std::vector<double> v) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 == 1 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2;
}

// A refusal without its figures, so that units refused for the same reason count together:
// every parenthesis holding a digit goes ("residuals exceed the measured noise (chi-square 312
// over 40 degrees of freedom, limit 61)" -> "residuals exceed the measured noise").
std::string refusal_kind(const std::string& why) {
  std::string out;
  std::size_t i = 0;
  while (i < why.size()) {
    const std::size_t open = why.find('(', i);
    if (open == std::string::npos) break;
    const std::size_t close = why.find(')', open);
    if (close == std::string::npos) break;
    const bool figures = std::any_of(why.begin() + open, why.begin() + close, [](char c) { return c >= '0' && c <= '9'; });
    std::string kept = why.substr(i, (figures ? open : close + 1) - i);
    if (figures)
      while (!kept.empty() && kept.back() == ' ') kept.pop_back();
    out += kept;
    i = close + 1;
  }
  return out + why.substr(std::min(i, why.size()));
}

// `text` broken at spaces into lines of at most `width` characters (a longer word stays whole),
// the lines after the first starting with `indent`. Never cuts a word.
std::string wrap_words(const std::string& text, std::size_t width, const std::string& indent) {
  std::string out, line;
  std::size_t start = 0;
  while (start <= text.size()) {
    std::size_t end = text.find(' ', start);
    if (end == std::string::npos) end = text.size();
    const std::string word = text.substr(start, end - start);
    if (!line.empty() && line.size() + 1 + word.size() > width) {
      out += line + "\n" + indent;
      line.clear();
    }
    line += (line.empty() ? "" : " ") + word;
    start = end + 1;
  }
  return out + line;
}

// The refusal list's text column starts after "    NNNNN  " and ends here (common practice, no
// source: a 100-column terminal).
constexpr std::size_t kRefusalColumns = 100 - 11;

std::string interval_text(const core::Metrics& m) {
  if (!m.resonance_hz) return "no resonance";
  return fmt::format("{}–{} MHz", m.resonance_low_hz ? fmt::format("{:.2f}", *m.resonance_low_hz / 1e6) : "sweep start",
                     m.resonance_high_hz ? fmt::format("{:.2f}", *m.resonance_high_hz / 1e6) : "sweep end");
}

// "" when the run was measured at the recipe's plan points, else both sweeps in words. A recipe
// given with --recipe judges stored readings only at the points it would have measured itself;
// limits over frequencies the run never measured would give a verdict about nothing.
std::string plan_difference(const std::vector<double>& plan, const core::RunResult& run) {
  bool same = plan.size() == run.points.size();
  for (std::size_t i = 0; same && i < plan.size(); ++i) {
    same = std::fabs(plan[i] - run.points[i].frequency_hz) <= std::max(1.0, 1e-9 * plan[i]);
  }
  if (same) return "";
  auto sweep = [](double first, double last, std::size_t n) {
    return fmt::format("{} in {} point{}", core::format_frequency_range(first, last), n, n == 1 ? "" : "s");
  };
  return fmt::format("measured at {}, the recipe sweeps {}",
                     run.points.empty() ? std::string("no point")
                                        : sweep(run.points.front().frequency_hz, run.points.back().frequency_hz, run.points.size()),
                     plan.empty() ? std::string("no point") : sweep(plan.front(), plan.back(), plan.size()));
}

struct Column {
  std::map<std::string, int> verdicts;
  std::vector<double> half_widths;
  std::map<std::string, int> decided_by;   // which resonance interval decided: rigorous, shift-bound, offset-pair, fit
};

void count(Column& c, const core::Judgement& j) {
  ++c.verdicts[core::to_string(j.verdict)];
  if (j.metrics.resonance_low_hz && j.metrics.resonance_high_hz) {
    c.half_widths.push_back((*j.metrics.resonance_high_hz - *j.metrics.resonance_low_hz) / 2);
  }
  if (!j.metrics.resonance_interval_kind.empty()) ++c.decided_by[j.metrics.resonance_interval_kind];
}

// "offset-pair 564, rigorous 36": the kinds by count, largest first.
std::string decided_text(const Column& c) {
  std::vector<std::pair<int, std::string>> sorted;
  for (const auto& [kind, n] : c.decided_by) sorted.push_back({-n, kind});
  std::sort(sorted.begin(), sorted.end());
  std::string out;
  for (const auto& [n, kind] : sorted) out += fmt::format("{}{} {}", out.empty() ? "" : ", ", kind, -n);
  return out.empty() ? "none" : out;
}

}  // namespace

int cmd_rejudge(const Argv& argv) {
  Args args(argv, "rejudge", {"--store", "--lot", "--recipe", "--list"}, {"--help"}, 0);
  if (args.flag("--help")) {
    std::cout << kRejudgeHelp;
    return kExitOk;
  }
  const auto file = args.get("--store");
  const auto lot = args.get("--lot");
  if (!file || !lot) args.usage_error("give --store FILE and --lot LOT");
  std::size_t list = 20;
  if (auto l = args.get("--list")) {
    try {
      list = static_cast<std::size_t>(std::stoul(*l));
    } catch (const std::exception&) {
      args.usage_error("--list needs a number");
    }
  }
  std::optional<core::Recipe> other;
  if (auto r = args.get("--recipe")) other = core::load_recipe(*r);

  std::error_code ec;
  if (!std::filesystem::exists(*file, ec)) throw CliExit(kExitStorage, fmt::format("rejudge: {}: no such store file", *file));
  auto opened = store::RunStore::open_read_only(*file);
  if (!opened) throw CliExit(kExitStorage, "rejudge: " + opened.error().message);
  store::RunStore& st = **opened;
  auto runs = st.lot_runs(*lot, true);
  if (!runs) throw CliExit(kExitStorage, "rejudge: " + runs.error().message);
  // The final run of each serial (the store lists a lot's runs in the order they were made).
  std::map<std::string, std::size_t> last;
  std::vector<std::string> order;
  for (std::size_t i = 0; i < runs->size(); ++i) {
    const std::string& s = (*runs)[i].serial;
    if (!last.count(s)) order.push_back(s);
    last[s] = i;
  }
  if (order.empty()) {
    std::cout << "no runs stored for lot " << *lot << "\n";
    return kExitNegative;
  }

  std::map<std::string, std::unique_ptr<core::CalibrationRecord>> cals;
  std::map<std::string, std::unique_ptr<core::Recipe>> recipes;
  Column stored, plain, fitted;
  std::map<std::string, int> refused;
  std::vector<std::string> changed, problems;
  const std::vector<double> other_plan = other ? core::plan_frequencies(*other) : std::vector<double>{};
  int other_plan_differs = 0, other_plan_compared = 0;
  std::string first_difference;
  int fit_decided = 0;
  std::size_t done = 0;
  for (const std::string& serial : order) {
    const core::RunResult& run = (*runs)[last[serial]];
    if (++done % 100 == 0) std::cerr << fmt::format("rejudge: {} of {} units\n", done, order.size());
    ++stored.verdicts[core::to_string(run.verdict)];
    auto ci = cals.find(run.calibration_id);
    if (ci == cals.end()) {
      auto loaded = st.load_calibration(run.calibration_id);
      std::unique_ptr<core::CalibrationRecord> cal;
      if (!loaded) problems.push_back(fmt::format("calibration {}: {}", run.calibration_id, loaded.error().message));
      else if (!*loaded) problems.push_back(fmt::format("calibration {} is not in the store", run.calibration_id));
      else cal = std::make_unique<core::CalibrationRecord>(core::as_when_used(std::move(**loaded)));
      ci = cals.emplace(run.calibration_id, std::move(cal)).first;
    }
    const core::Recipe* recipe = other ? &*other : nullptr;
    if (!recipe) {
      auto ri = recipes.find(run.recipe.content_hash);
      if (ri == recipes.end()) {
        std::unique_ptr<core::Recipe> r;
        auto text = st.recipe_text(run.recipe.content_hash);
        if (!text || !*text) {
          problems.push_back(fmt::format("recipe {} {} ({}) is not in the store", run.recipe.name, run.recipe.version,
                                         run.recipe.content_hash.substr(0, 12)));
        } else {
          try {
            r = std::make_unique<core::Recipe>(core::parse_recipe(**text, run.recipe.name + " (stored)"));
          } catch (const std::exception& e) {
            problems.push_back(fmt::format("stored recipe {}: {}", run.recipe.name, e.what()));
          }
        }
        ri = recipes.emplace(run.recipe.content_hash, std::move(r)).first;
      }
      recipe = ri->second.get();
    }
    if (!ci->second || !recipe || run.points.empty()) {
      if (run.points.empty() && run.verdict != core::Verdict::aborted) problems.push_back(serial + ": no readings stored");
      continue;
    }
    if (other && run.verdict != core::Verdict::aborted) {
      ++other_plan_compared;
      if (std::string why = plan_difference(other_plan, run); !why.empty()) {
        ++other_plan_differs;
        if (first_difference.empty()) first_difference = why;
        problems.push_back(fmt::format("{}: {}; not re-judged", serial, why));
        continue;
      }
    }
    const std::vector<core::Reading> readings = core::direct_readings(run);
    const std::vector<core::Reading> offset = core::offset_readings(run);
    const core::Judgement a = core::judge(*recipe, *ci->second, readings, core::JudgeOptions{false}, offset);
    const core::Judgement b = core::judge(*recipe, *ci->second, readings, core::JudgeOptions{true}, offset);
    count(plain, a);
    count(fitted, b);
    if (b.metrics.resonance_interval_kind == "fit") ++fit_decided;
    else if (!b.metrics.fit_refused.empty()) ++refused[refusal_kind(b.metrics.fit_refused)];
    if (a.verdict != b.verdict) {
      changed.push_back(fmt::format("{}: {} -> {}; resonance {} -> {}", serial, core::to_string(a.verdict),
                                    core::to_string(b.verdict), interval_text(a.metrics), interval_text(b.metrics)));
    }
  }

  if (other_plan_compared > 0 && other_plan_differs == other_plan_compared) {
    throw CliExit(kExitUsage,
                  fmt::format("rejudge: --recipe {}: recipe {} {} does not sweep the points lot {} was measured at ({}); "
                              "it must sweep the same points",
                              other->source_path, other->name, other->version, *lot, first_difference));
  }
  std::cout << fmt::format("re-judged lot {} from {}: {} units (final runs), {}\n", *lot, *file, order.size(),
                           other ? fmt::format("under recipe {} {} ({})", other->name, other->version, other->source_path)
                                 : std::string("each under its own stored recipe"));
  std::cout << fmt::format("  {:<14}{:>10}{:>16}{:>16}\n", "verdict", "stored", "points alone", "with the fit");
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    auto get = [&](const Column& c) { auto it = c.verdicts.find(v); return it == c.verdicts.end() ? 0 : it->second; };
    std::cout << fmt::format("  {:<14}{:>10}{:>16}{:>16}\n", v, get(stored), get(plain), get(fitted));
  }
  std::cout << fmt::format("  resonance interval, median half-width: points alone {:.2f} MHz ({} closed), with the fit "
                           "{:.2f} MHz ({} closed)\n",
                           median(plain.half_widths) / 1e6, plain.half_widths.size(), median(fitted.half_widths) / 1e6,
                           fitted.half_widths.size());
  std::cout << fmt::format("  the interval that decided: points alone {}; with the fit {}\n", decided_text(plain),
                           decided_text(fitted));
  std::cout << fmt::format("  the fit decided the resonance interval of {} units\n", fit_decided);
  if (!refused.empty()) {
    std::vector<std::pair<int, std::string>> sorted;
    for (const auto& [why, n] : refused) sorted.push_back({n, why});
    std::sort(sorted.rbegin(), sorted.rend());
    std::cout << "  the fit was refused:\n";
    for (const auto& [n, why] : sorted)
      std::cout << fmt::format("    {:>5}  {}\n", n, wrap_words(why, kRefusalColumns, std::string(11, ' ')));
  }
  std::cout << fmt::format("  verdicts the fit changes: {}\n", changed.size());
  for (std::size_t i = 0; i < changed.size() && i < list; ++i) std::cout << "    " << changed[i] << "\n";
  if (changed.size() > list) std::cout << fmt::format("    ... {} more (--list N)\n", changed.size() - list);
  if (!problems.empty()) {
    std::cout << fmt::format("  not re-judged ({}):\n", problems.size());
    for (std::size_t i = 0; i < problems.size() && i < list; ++i) std::cout << "    " << problems[i] << "\n";
  }
  return kExitOk;
}

}  // namespace echoline::client
