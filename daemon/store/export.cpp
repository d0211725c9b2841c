// CSV, JSON and Touchstone text of stored runs. Pure string building; write_text_file is the one
// function here that touches disk.
#include "daemon/store/export.hpp"

#include <fcntl.h>
#include <fmt/format.h>
#include <unistd.h>

#include <cerrno>
#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <nlohmann/json.hpp>

namespace echoline::store {

using nlohmann::json;

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::string num(double v) { return fmt::format("{}", v); }
std::string num(const std::optional<double>& v) { return v ? num(*v) : std::string(); }

json jnum(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }
json jnum(const std::optional<double>& v) { return v ? jnum(*v) : json(nullptr); }

void append_row(std::string& out, const std::vector<std::string>& fields) {
  for (std::size_t i = 0; i < fields.size(); ++i) {
    if (i) out += ',';
    out += csv_field(fields[i]);
  }
  out += "\r\n";
}

}  // namespace

const std::vector<std::string> kRunCsvColumns = {
    "run_id", "serial", "lot", "station", "operator", "recipe", "recipe_version", "recipe_hash", "decision_rule",
    "started_utc", "ended_utc", "temperature_c", "calibration_id", "retest", "verdict", "failure_class", "reason",
    "resonance_hz", "resonance_low_hz", "resonance_high_hz", "depth_db", "bandwidth_hz", "band_low_hz", "band_high_hz", "min_margin_db", "vswr_at_resonance",
    "mismatch_loss_db", "directivity_db", "trim_element_length_mm", "trim_change_mm", "trim_text", "total_s", "sweep_s",
    "analysis_s", "points"};

std::string csv_field(std::string_view value) {
  if (value.find_first_of(",\"\r\n") == std::string_view::npos) return std::string(value);
  std::string out = "\"";
  for (const char c : value) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
  return out;
}

std::string csv_points(const std::vector<core::RunResult>& runs) {
  std::string out;
  // offset_raw_dbm: the point read through the offset line (recipes with the offset pair); empty
  // otherwise.
  append_row(out, {"run_id", "serial", "lot", "recipe", "verdict", "frequency_hz", "raw_dbm", "return_loss_db",
                   "return_loss_worst_db", "return_loss_best_db", "offset_raw_dbm"});
  for (const auto& r : runs) {
    for (const auto& p : r.points) {
      append_row(out, {r.run_id, r.serial, r.lot, r.recipe.name, core::to_string(r.verdict), num(p.frequency_hz),
                       num(p.raw_dbm), num(p.return_loss_db), num(p.return_loss_worst_db), num(p.return_loss_best_db),
                       std::isfinite(p.offset_raw_dbm) ? num(p.offset_raw_dbm) : std::string()});
    }
  }
  return out;
}

std::string csv_runs(const std::vector<core::RunResult>& runs) {
  std::string out;
  append_row(out, kRunCsvColumns);
  for (const auto& r : runs) {
    const auto& m = r.metrics;
    append_row(out, {r.run_id, r.serial, r.lot, r.station, r.operator_name, r.recipe.name, r.recipe.version,
                     r.recipe.content_hash, r.decision_rule, r.started_utc, r.ended_utc, num(r.temperature_c),
                     r.calibration_id, r.retest ? "1" : "0", core::to_string(r.verdict), core::to_string(r.failure_class),
                     r.reason, num(m.resonance_hz), num(m.resonance_low_hz), num(m.resonance_high_hz), num(m.depth_db), num(m.bandwidth_hz), num(m.band_low_hz),
                     num(m.band_high_hz), num(m.min_margin_db), num(m.vswr_at_resonance), num(m.mismatch_loss_db),
                     num(m.directivity_db), r.trim ? num(r.trim->element_length_mm) : "",
                     r.trim ? num(r.trim->change_mm) : "", r.trim ? r.trim->text : "", num(r.timings.total_s),
                     num(r.timings.sweep_s), num(r.timings.analysis_s), std::to_string(r.points.size())});
  }
  return out;
}

Result<std::vector<std::vector<std::string>>> parse_csv(std::string_view text) {
  std::vector<std::vector<std::string>> rows;
  std::vector<std::string> row;
  std::string field;
  bool quoted = false, in_quotes = false, field_started = false;
  int line = 1, column = 0;
  auto end_field = [&] { row.push_back(std::move(field)); field.clear(); quoted = in_quotes = field_started = false; };
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    ++column;
    if (in_quotes) {
      if (c == '"') {
        if (i + 1 < text.size() && text[i + 1] == '"') { field += '"'; ++i; ++column; }
        else in_quotes = false;
      } else {
        if (c == '\n') { ++line; column = 0; }
        field += c;
      }
      continue;
    }
    if (c == '"') {
      if (field_started) {
        return make_error(ErrorKind::invalid_argument,
                          fmt::format("CSV line {}, column {}: quote inside an unquoted field", line, column));
      }
      quoted = in_quotes = field_started = true;
    } else if (c == ',') {
      end_field();
    } else if (c == '\r' || c == '\n') {
      if (c == '\r' && i + 1 < text.size() && text[i + 1] == '\n') ++i;
      end_field();
      rows.push_back(std::move(row));
      row.clear();
      ++line;
      column = 0;
    } else {
      if (quoted) {
        return make_error(ErrorKind::invalid_argument,
                          fmt::format("CSV line {}, column {}: text after a closing quote", line, column));
      }
      field += c;
      field_started = true;
    }
  }
  if (in_quotes) return make_error(ErrorKind::invalid_argument, fmt::format("CSV line {}: unterminated quoted field", line));
  if (field_started || !row.empty()) {
    end_field();
    rows.push_back(std::move(row));
  }
  return rows;
}

json run_to_json(const core::RunResult& r, bool with_points) {
  const auto& m = r.metrics;
  json j = {
      {"run_id", r.run_id}, {"serial", r.serial}, {"lot", r.lot}, {"station", r.station},
      {"operator", r.operator_name},
      {"recipe", {{"name", r.recipe.name}, {"version", r.recipe.version}, {"content_hash", r.recipe.content_hash}}},
      {"decision_rule", r.decision_rule}, {"instruments", r.instruments}, {"started_utc", r.started_utc},
      {"ended_utc", r.ended_utc}, {"temperature_c", jnum(r.temperature_c)}, {"calibration_id", r.calibration_id},
      {"retest", r.retest}, {"verdict", core::to_string(r.verdict)}, {"failure_class", core::to_string(r.failure_class)},
      {"reason", r.reason},
      {"metrics",
       {{"resonance_hz", jnum(m.resonance_hz)}, {"depth_db", jnum(m.depth_db)}, {"bandwidth_hz", jnum(m.bandwidth_hz)},
        {"band_low_hz", jnum(m.band_low_hz)}, {"band_high_hz", jnum(m.band_high_hz)},
        {"min_margin_db", jnum(m.min_margin_db)}, {"vswr_at_resonance", jnum(m.vswr_at_resonance)},
        {"mismatch_loss_db", jnum(m.mismatch_loss_db)}, {"directivity_db", jnum(m.directivity_db)},
        {"resonance_low_hz", jnum(m.resonance_low_hz)}, {"resonance_high_hz", jnum(m.resonance_high_hz)},
        {"resonance_interval", m.resonance_interval_kind}}},
      {"trim", nullptr},
      {"timings", {{"total_s", jnum(r.timings.total_s)}, {"sweep_s", jnum(r.timings.sweep_s)},
                   {"analysis_s", jnum(r.timings.analysis_s)}}},
      {"points_count", r.points.size()},
      {"software", r.software},
  };
  if (r.trim) {
    j["trim"] = {{"element_length_mm", jnum(r.trim->element_length_mm)}, {"change_mm", jnum(r.trim->change_mm)},
                 {"measured_hz", jnum(r.trim->measured_hz)}, {"target_hz", jnum(r.trim->target_hz)},
                 {"text", r.trim->text}};
  }
  if (with_points) {
    // Columns: frequency_hz, raw_dbm, return_loss_db, worst, best (null best = +inf, unbounded),
    // and offset_raw_dbm for a run read twice with the offset pair.
    // Any finite second reading (an aborted run keeps a partial one).
    const bool pair = std::any_of(r.points.begin(), r.points.end(),
                                  [](const core::PointResult& p) { return std::isfinite(p.offset_raw_dbm); });
    json pts = json::array();
    for (const auto& p : r.points) {
      json row = json::array({jnum(p.frequency_hz), jnum(p.raw_dbm), jnum(p.return_loss_db),
                              jnum(p.return_loss_worst_db), jnum(p.return_loss_best_db)});
      if (pair) row.push_back(jnum(p.offset_raw_dbm));
      pts.push_back(std::move(row));
    }
    j["point_columns"] = {"frequency_hz", "raw_dbm", "return_loss_db", "return_loss_worst_db", "return_loss_best_db"};
    if (pair) j["point_columns"].push_back("offset_raw_dbm");
    j["points"] = std::move(pts);
  }
  return j;
}

namespace {

double get_num(const json& j, const char* key, double when_null = kNaN) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return when_null;
  return it->get<double>();
}
std::optional<double> get_opt(const json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return std::nullopt;
  return it->get<double>();
}
double cell(const json& v, double when_null = kNaN) { return v.is_null() ? when_null : v.get<double>(); }

}  // namespace

Result<core::RunResult> run_from_json(const json& j) {
  try {
    core::RunResult r;
    r.run_id = j.at("run_id").get<std::string>();
    r.serial = j.at("serial").get<std::string>();
    r.lot = j.at("lot").get<std::string>();
    r.station = j.at("station").get<std::string>();
    r.operator_name = j.at("operator").get<std::string>();
    r.recipe.name = j.at("recipe").at("name").get<std::string>();
    r.recipe.version = j.at("recipe").at("version").get<std::string>();
    r.recipe.content_hash = j.at("recipe").at("content_hash").get<std::string>();
    r.decision_rule = j.at("decision_rule").get<std::string>();
    r.instruments = j.at("instruments").get<std::map<std::string, std::string>>();
    r.started_utc = j.at("started_utc").get<std::string>();
    r.ended_utc = j.at("ended_utc").get<std::string>();
    r.temperature_c = get_opt(j, "temperature_c");
    r.calibration_id = j.at("calibration_id").get<std::string>();
    r.retest = j.at("retest").get<bool>();
    const auto verdict = j.at("verdict").get<std::string>();
    r.verdict = core::Verdict::aborted;
    for (auto v : {core::Verdict::pass, core::Verdict::fail, core::Verdict::inconclusive, core::Verdict::aborted}) {
      if (verdict == core::to_string(v)) r.verdict = v;
    }
    const auto cls = j.at("failure_class").get<std::string>();
    for (auto c : {core::FailureClass::none, core::FailureClass::no_response, core::FailureClass::tuned_low,
                   core::FailureClass::tuned_high, core::FailureClass::shallow, core::FailureClass::out_of_mask}) {
      if (cls == core::to_string(c)) r.failure_class = c;
    }
    r.reason = j.at("reason").get<std::string>();
    const json& m = j.at("metrics");
    r.metrics.resonance_hz = get_opt(m, "resonance_hz");
    r.metrics.resonance_low_hz = get_opt(m, "resonance_low_hz");     // absent in exports before schema 5
    r.metrics.resonance_high_hz = get_opt(m, "resonance_high_hz");
    r.metrics.depth_db = get_num(m, "depth_db");
    r.metrics.bandwidth_hz = get_opt(m, "bandwidth_hz");
    r.metrics.band_low_hz = get_opt(m, "band_low_hz");
    r.metrics.band_high_hz = get_opt(m, "band_high_hz");
    r.metrics.min_margin_db = get_num(m, "min_margin_db");
    r.metrics.vswr_at_resonance = get_num(m, "vswr_at_resonance", kInf);
    r.metrics.mismatch_loss_db = get_num(m, "mismatch_loss_db");
    r.metrics.directivity_db = get_num(m, "directivity_db");
    r.metrics.resonance_interval_kind = m.value("resonance_interval", std::string());   // absent before schema 6
    r.software = j.value("software", std::string());
    if (!j.at("trim").is_null()) {
      const json& t = j.at("trim");
      r.trim = core::TrimAdvice{get_num(t, "element_length_mm"), get_num(t, "change_mm"), get_num(t, "measured_hz"),
                                get_num(t, "target_hz"), t.at("text").get<std::string>()};
    }
    const json& t = j.at("timings");
    r.timings = {get_num(t, "total_s"), get_num(t, "sweep_s"), get_num(t, "analysis_s")};
    if (j.contains("points")) {
      for (const auto& p : j.at("points")) {
        r.points.push_back(core::PointResult{cell(p.at(0)), cell(p.at(1)), cell(p.at(2)), cell(p.at(3)), cell(p.at(4), kInf)});
        if (p.size() > 5) r.points.back().offset_raw_dbm = cell(p.at(5));   // the offset pair's second reading
      }
    }
    return r;
  } catch (const json::exception& e) {
    return make_error(ErrorKind::invalid_argument, fmt::format("run JSON: {}", e.what()));
  }
}

json calibration_to_json(const core::CalibrationRecord& c) {
  json traces = json::object();
  for (const auto& [standard, readings] : c.traces) {
    json arr = json::array();
    for (const auto& r : readings) arr.push_back(json::array({jnum(r.frequency_hz), jnum(r.raw_dbm)}));
    traces[standard] = std::move(arr);
  }
  json ref = json::array(), dir = json::array();
  for (double v : c.reference_dbm) ref.push_back(jnum(v));
  for (double v : c.directivity_db) dir.push_back(jnum(v));
  return {{"id", c.id}, {"created_utc", c.created_utc},
          {"recipe", {{"name", c.recipe.name}, {"version", c.recipe.version}, {"content_hash", c.recipe.content_hash}}},
          {"station", c.station}, {"instruments", c.instruments}, {"temperature_c", jnum(c.temperature_c)},
          {"traces", std::move(traces)}, {"reference_dbm", std::move(ref)}, {"directivity_db", std::move(dir)},
          {"min_directivity_db", jnum(c.min_directivity_db)}, {"noise_margin_db", jnum(c.noise_margin_db)},
          {"warnings", c.warnings}, {"errors", c.errors}, {"valid", c.valid}, {"max_age_s", jnum(c.max_age_s)}, {"max_units", c.max_units},
          {"max_temperature_change_c", jnum(c.max_temperature_change_c)}, {"units_since", c.units_since}};
}

namespace {
std::string document(std::string_view kind, std::string_view key, const std::vector<core::RunResult>& runs) {
  json arr = json::array();
  for (const auto& r : runs) arr.push_back(run_to_json(r, true));
  json doc = {{"format", "echoline-runs"}, {"version", 1}, {"kind", kind}, {"key", key}, {"runs", std::move(arr)}};
  return doc.dump(1) + "\n";
}
}  // namespace

std::string json_run(const core::RunResult& run) { return document("run", run.run_id, {run}); }
std::string json_serial(std::string_view serial, const std::vector<core::RunResult>& runs) {
  return document("serial", serial, runs);
}
std::string json_lot(std::string_view lot, const std::vector<core::RunResult>& runs) { return document("lot", lot, runs); }

std::string touchstone_s1p(const core::RunResult& run) {
  auto flat = [](std::string s) {
    for (char& c : s) {
      if (c == '\r' || c == '\n') c = ' ';
    }
    return s;
  };
  std::string out;
  out += fmt::format("! Echoline run {} serial {} lot {}\n", flat(run.run_id), flat(run.serial), flat(run.lot));
  out += fmt::format("! recipe {} {} verdict {} started {}\n", flat(run.recipe.name), flat(run.recipe.version),
                     core::to_string(run.verdict), flat(run.started_utc));
  out += fmt::format("! calibration {} station {} software {}\n",
                     run.calibration_id.empty() ? std::string("none") : flat(run.calibration_id), flat(run.station),
                     run.software.empty() ? std::string("unknown") : flat(run.software));
  out += "! scalar return loss: phase unknown, written as 0\n";
  out += "! A scalar station measures no phase: every angle below is 0 and carries no measurement.\n";
  out += "! S11 dB = -(calibrated return loss); the angle column carries no measurement\n";
  out += "! Bounds: the true |S11| lies within the run's worst/best return-loss bounds (directivity,\n";
  out += "! reference, noise), which this format cannot carry; export the run as CSV or JSON for them.\n";
  out += "# HZ S DB R 50\n";
  for (const auto& p : run.points) {
    out += fmt::format("{} {} 0\n", num(p.frequency_hz), num(-p.return_loss_db));
  }
  return out;
}

Status write_text_file(const std::filesystem::path& file, std::string_view content) {
  const std::filesystem::path tmp = file.string() + ".tmp";
  auto io_error = [&](const char* doing) {
    return make_error(ErrorKind::io, fmt::format("export {}: {}: {}", file.string(), doing, std::strerror(errno)));
  };
  const int fd = ::open(tmp.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (fd < 0) return io_error("cannot create the temporary file");
  std::size_t done = 0;
  while (done < content.size()) {
    const ssize_t n = ::write(fd, content.data() + done, content.size() - done);
    if (n < 0) {
      if (errno == EINTR) continue;
      Error e = io_error("write failed");
      ::close(fd);
      ::unlink(tmp.c_str());
      return e;
    }
    done += static_cast<std::size_t>(n);
  }
  if (::fsync(fd) != 0) {
    Error e = io_error("fsync failed");
    ::close(fd);
    ::unlink(tmp.c_str());
    return e;
  }
  ::close(fd);
  if (::rename(tmp.c_str(), file.c_str()) != 0) {
    Error e = io_error("rename failed");
    ::unlink(tmp.c_str());
    return e;
  }
  return Status::success();
}

}  // namespace echoline::store
