// Clients get the files: reports and exports come back through the API and `echoline` writes
// them (or prints them with --out -). No API request makes the daemon create or replace a file,
// not even one named like its own run store. Offline readers open the store read-only and never
// migrate it.
#include <sqlite3.h>

#include <algorithm>
#include <fstream>
#include <iterator>
#include <cmath>
#include <iostream>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <gtest/gtest.h>

#include "daemon/store/run_store.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

namespace fs = std::filesystem;

struct Outcome {
  int code = -1000;
  std::string out;   // standard output only (standard error goes to the test's log)
};

Outcome run_client(std::vector<std::string> args) {
  args.insert(args.begin(), testing::client_binary().string());
  testing::ChildProcess p = testing::ChildProcess::start(args, testing::ChildProcess::Options{});
  Outcome o;
  while (auto line = p.read_line(30s)) o.out += *line + "\n";
  auto code = p.wait(30s);
  o.code = code ? *code : -999;
  return o;
}

std::string read_file(const fs::path& f) {
  std::ifstream in(f, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

// Every path under `dir` (recursive); the store's -wal and -shm files are the daemon's own.
std::set<std::string> listing(const fs::path& dir) {
  std::set<std::string> out;
  for (const auto& e : fs::recursive_directory_iterator(dir)) out.insert(fs::relative(e.path(), dir).string());
  return out;
}

int user_version(const fs::path& file) {
  sqlite3* db = nullptr;
  sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr);
  sqlite3_stmt* st = nullptr;
  int v = -1;
  if (sqlite3_prepare_v2(db, "PRAGMA user_version", -1, &st, nullptr) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW) {
    v = sqlite3_column_int(st, 0);
  }
  sqlite3_finalize(st);
  sqlite3_close(db);
  return v;
}

void set_user_version(const fs::path& file, int v) {
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
  ASSERT_EQ(sqlite3_exec(db, ("PRAGMA user_version = " + std::to_string(v)).c_str(), nullptr, nullptr, nullptr), SQLITE_OK);
  sqlite3_close(db);
}

class DaemonDocuments : public ::testing::Test {
 protected:
  void SetUp() override {
    sim_.emplace("tiny-lot.jsonc");
    config_ = write_station_config(dir_.path(), *sim_);
    daemon_.emplace(config_);
    Api api = Api::connect(*daemon_);
    ASSERT_EQ(calibrate(api, *sim_)["event"], "result");
    run_ = test_unit(api, *sim_, "TINY-01", "TINY");
  }
  fs::path data_dir() const { return dir_.path() / "data"; }
  fs::path store_file() const { return data_dir() / "e2e-bench.sqlite"; }

  testing::TempDir dir_{"echoline-documents"};
  std::optional<Sim> sim_;
  fs::path config_;
  std::optional<Daemon> daemon_;
  json run_;
};

TEST_F(DaemonDocuments, NoRequestMakesTheDaemonCreateOrReplaceAFile) {
  Api api = Api::connect(*daemon_);
  ASSERT_TRUE(api.call("hello", {{"role", "engineer"}})["ok"].get<bool>());
  const auto before = listing(dir_.path());
  const std::string store_head = read_file(store_file()).substr(0, 16);
  ASSERT_EQ(store_head, std::string("SQLite format 3") + '\0');

  const std::vector<fs::path> targets = {store_file(), data_dir() / "lot.csv", data_dir() / "lot.html",
                                         store_file().string() + ".tmp", dir_.path() / "station.jsonc",
                                         dir_.path() / "new" / "x.json"};
  int refused = 0;
  for (const auto& path : targets) {
    const std::vector<std::pair<std::string, json>> requests = {
        {"report.lot", {{"lot", "TINY"}, {"path", path.string()}}},
        {"export", {{"scope", "lot"}, {"key", "TINY"}, {"format", "csv"}, {"path", path.string()}}},
        {"export", {{"scope", "run"}, {"key", run_["run_id"]}, {"format", "json"}, {"path", path.string()}}},
    };
    for (const auto& [call, args] : requests) {
      json r = api.call(call, args);
      ASSERT_FALSE(r["ok"].get<bool>()) << call << " " << path << " -> " << r.dump().substr(0, 300);
      EXPECT_EQ(r["error"]["code"], "bad_request");
      EXPECT_NE(r["error"]["message"].get<std::string>().find("the daemon writes no file"), std::string::npos)
          << r.dump();
      ++refused;
    }
  }
  EXPECT_EQ(refused, 18);
  EXPECT_EQ(listing(dir_.path()), before) << "a file appeared or vanished";
  EXPECT_EQ(read_file(store_file()).substr(0, 16), store_head);
  EXPECT_EQ(read_file(dir_.path() / "station.jsonc").find("e2e-bench") != std::string::npos, true);

  // The store is the live one, intact: the next unit is stored beside the first.
  json second = test_unit(api, *sim_, "TINY-03", "TINY");
  EXPECT_TRUE(second["stored"].get<bool>()) << second.dump();
  json lot = api.call("runs.lot", {{"lot", "TINY"}});
  EXPECT_EQ(lot["result"]["runs"].size(), 2u);
  EXPECT_EQ(daemon_->process().terminate(), 0);
  daemon_.reset();
  auto store = store::RunStore::open_read_only(store_file());
  ASSERT_TRUE(store.ok()) << store.error().message;
  auto ok = (*store)->integrity_check();
  ASSERT_TRUE(ok.ok());
  EXPECT_EQ(*ok, "ok");
  auto runs = (*store)->lot_runs("TINY", false);
  ASSERT_TRUE(runs.ok());
  EXPECT_EQ(runs->size(), 2u);
}

TEST_F(DaemonDocuments, TheClientWritesTheReportAndTheExportOrPrintsThemToStandardOutput) {
  const std::string run_id = run_["run_id"];
  testing::TempDir mine("echoline-client-files");
  const fs::path html = mine / "lot.html";
  Outcome report = run_client({"report", "--config", config_.string(), "--lot", "TINY", "--out", html.string()});
  ASSERT_EQ(report.code, 0) << report.out;
  EXPECT_NE(report.out.find("report: " + html.string()), std::string::npos) << report.out;
  EXPECT_NE(read_file(html).find("TINY-01"), std::string::npos);
  EXPECT_NE(read_file(html).find("</html>"), std::string::npos);

  Outcome csv = run_client({"export", "--config", config_.string(), "--run", run_id, "--format", "csv", "--out", "-"});
  ASSERT_EQ(csv.code, 0) << csv.out;
  // Standard output is the CSV alone: a header and one row per point (221), nothing else.
  ASSERT_EQ(csv.out.rfind("run_id,serial,lot,recipe,verdict,frequency_hz", 0), 0u) << csv.out.substr(0, 200);
  EXPECT_EQ(std::count(csv.out.begin(), csv.out.end(), '\n'), 222);
  EXPECT_EQ(csv.out.find("exported"), std::string::npos);

  const fs::path js = mine / "run.json";
  Outcome json_out = run_client({"export", "--config", config_.string(), "--scope", "serial", "--key", "TINY-01",
                                 "--format", "json", "--out", js.string()});
  ASSERT_EQ(json_out.code, 0) << json_out.out;
  EXPECT_NE(json_out.out.find("exported 1 run to " + js.string()), std::string::npos) << json_out.out;
  json doc = json::parse(read_file(js));
  EXPECT_EQ(doc["kind"], "serial");
  EXPECT_EQ(doc["runs"][0]["points"].size(), 221u);
  EXPECT_FALSE(fs::exists(data_dir() / "run.json"));
}

TEST_F(DaemonDocuments, OfflineReadersOpenTheStoreReadOnlyAndNeverMigrateIt) {
  EXPECT_EQ(daemon_->process().terminate(), 0);
  daemon_.reset();
  const std::string run_id = run_["run_id"];
  // Offline, the same export as through the daemon.
  Outcome csv = run_client({"export", "--store", store_file().string(), "--run", run_id, "--format", "csv", "--out", "-"});
  ASSERT_EQ(csv.code, 0) << csv.out;
  EXPECT_EQ(std::count(csv.out.begin(), csv.out.end(), '\n'), 222);

  for (int version : {store::kSchemaVersion + 1, store::kSchemaVersion - 1}) {
    testing::TempDir copy_dir("echoline-store-copy");
    const fs::path copy = copy_dir / "copy.sqlite";
    fs::copy_file(store_file(), copy);
    set_user_version(copy, version);
    const std::string bytes = read_file(copy);
    testing::ChildProcess::Options o;
    o.merge_stderr = true;
    testing::ChildProcess p = testing::ChildProcess::start(
        {testing::client_binary().string(), "export", "--store", copy.string(), "--run", run_id, "--format", "json",
         "--out", "-"},
        o);
    std::string text;
    while (auto line = p.read_line(30s)) text += *line + "\n";
    EXPECT_EQ(p.wait(30s), 5) << text;   // storage error (README, exit codes)
    EXPECT_NE(text.find(fmt::format("schema version {} is {} than this program", version,
                                    version > store::kSchemaVersion ? "newer" : "older")),
              std::string::npos)
        << text;
    EXPECT_NE(text.find(copy.string()), std::string::npos) << text;
    EXPECT_EQ(user_version(copy), version) << "an offline reader migrated the store";
    EXPECT_EQ(read_file(copy), bytes) << "an offline reader changed the store file";
    // SQLite may add its -wal/-shm companions (its locking for readers of a WAL file); nothing else.
    for (const auto& name : listing(copy_dir.path())) {
      EXPECT_TRUE(name == "copy.sqlite" || name == "copy.sqlite-wal" || name == "copy.sqlite-shm") << name;
    }
  }
}

// Debian's python3 (python3-scikit-rf installs skrf there), else whatever python3 is on PATH.
std::string debian_python() {
  std::error_code ec;
  return fs::exists("/usr/bin/python3", ec) ? "/usr/bin/python3" : "python3";
}

// Reads a Touchstone file with scikit-rf (an independent reader) and prints, per point,
// "frequency_hz s11_db s11_deg"; or "no-skrf" when the module cannot be imported.
constexpr const char* kSkrfReader = R"py(
import sys, warnings
warnings.filterwarnings("ignore")
try:
    import skrf
except Exception:
    print("no-skrf")
    sys.exit(0)
print("begin")   # skrf may print notes of its own on import (e.g. no plotting support)
n = skrf.Network(sys.argv[1])
print("ports", n.nports, "points", len(n.f))
for f, db, deg in zip(n.f, n.s_db[:, 0, 0], n.s_deg[:, 0, 0]):
    print(repr(float(f)), repr(float(db)), repr(float(deg)))
)py";

TEST_F(DaemonDocuments, TouchstoneExportReadsBackInScikitRfAsTheStoredReturnLoss) {
  const std::string run_id = run_["run_id"];
  testing::TempDir mine("echoline-touchstone");
  const fs::path s1p = mine / "unit.s1p";
  Outcome made = run_client({"export", "--config", config_.string(), "--run", run_id, "--format", "s1p", "--out",
                             s1p.string()});
  ASSERT_EQ(made.code, 0) << made.out;
  const std::string text = read_file(s1p);
  EXPECT_NE(text.find("# HZ S DB R 50"), std::string::npos);
  EXPECT_NE(text.find("serial TINY-01"), std::string::npos);
  EXPECT_NE(text.find("run " + run_id), std::string::npos);
  EXPECT_NE(text.find("calibration cal-"), std::string::npos) << text.substr(0, 600);
  EXPECT_NE(text.find("measures no phase"), std::string::npos);
  EXPECT_NE(text.find("Bounds:"), std::string::npos);

  // The stored values, through run.get.
  Api api = Api::connect(*daemon_);
  json got = api.call("run.get", {{"run_id", run_id}});
  ASSERT_TRUE(got["ok"].get<bool>()) << got.dump().substr(0, 300);
  const json& points = got["result"]["run"]["points"];
  ASSERT_EQ(points.size(), 221u);

  testing::ChildProcess py = testing::ChildProcess::start({debian_python(), "-c", kSkrfReader, s1p.string()});
  std::vector<std::string> lines;
  bool begun = false;
  while (auto line = py.read_line(60s)) {
    if (*line == "no-skrf" || begun) lines.push_back(*line);
    begun = begun || *line == "begin";
  }
  ASSERT_EQ(py.wait(30s), 0);
  ASSERT_FALSE(lines.empty());
  if (lines.front() == "no-skrf") {
    GTEST_SKIP() << "python3 cannot import skrf: install Debian's python3-scikit-rf (scripts/deps) to read the "
                    "Touchstone file back with an independent reader";
  }
  EXPECT_EQ(lines.front(), "ports 1 points 221");
  ASSERT_EQ(lines.size(), points.size() + 1);
  double worst = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    std::istringstream in(lines[i + 1]);
    double f = 0, db = 0, deg = 1;
    in >> f >> db >> deg;
    EXPECT_DOUBLE_EQ(f, points[i][0].get<double>()) << i;
    // |S11| in dB = -(return loss), as stored (common practice: RL = -20 log10 |S11|).
    const double expected = -points[i][2].get<double>();
    worst = std::max(worst, std::abs(db - expected));
    EXPECT_NEAR(db, expected, 1e-9) << "point " << i;
    EXPECT_EQ(deg, 0.0) << "point " << i;
  }
  std::cout << "Touchstone read back by scikit-rf: 221 points, largest |S11| dB difference " << worst << " dB\n";
}

}  // namespace
}  // namespace echoline::e2e
