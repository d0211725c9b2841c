// echoline-fleet: several stations, one central record. Starts a real PostgreSQL server
// (initdb + pg_ctl), creates the central schema and roles with `echoline central migrate`, runs
// N stations (echoline-sim + echolined each, forwarding to it) that test one lot between them
// (a few units retested on another bench), stops the database for a while (several times) and
// SIGKILLs one daemon mid-lot. Then checks that every run stored on every station is in the
// central database exactly once (counts and per-run content hashes), prints how long the
// stations' store took to record a run while the forwarder ran, and writes the cross-station
// lot report from the central database. Exit 0 all held, 1 one broke, 2 usage or set-up.
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <map>
#include <mutex>
#include <set>
#include <string>
#include <thread>
#include <vector>

#include <sys/stat.h>

#include <fmt/format.h>

#include "daemon/central/documents.hpp"
#include "daemon/central/reader.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/store/run_store.hpp"
#include "drivers/whole_number.hpp"
#include "tests/soak/lot_runner.hpp"
#include "tests/soak/station_under_test.hpp"
#include "tests/support/postgres_server.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::soak;
using nlohmann::json;
using Clock = std::chrono::steady_clock;
using namespace std::chrono_literals;

constexpr const char* kUsage = R"(usage: echoline-fleet [options]
  --stations N       stations (daemons), 2 to 8 (default 3)
  --units N          units each station tests, 4 to 100000 (default 30)
  --outages K        times the database is stopped during the lot, 0 to 20 (default 1)
  --outage-s S       seconds each stop lasts, 1 to 3600 (default 3)
  --no-kill          do not SIGKILL a daemon mid-lot (default: station 2's daemon is killed
                     halfway through its units and restarted)
  --report FILE      write the cross-station lot report (HTML) read from the central database
  --keep DIR         work in DIR and keep it (stores, logs, configs); default: a temp folder
Progress goes to standard output, one line per event and every 10 % of the lot.
)";

struct Options {
  int stations = 3, units = 30, outages = 1, outage_s = 3;
  bool kill = true;
  std::string report, keep;
};

[[noreturn]] void usage(const std::string& message) {
  std::fprintf(stderr, "echoline-fleet: %s\n%s", message.c_str(), kUsage);
  std::exit(2);
}

Options parse(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&]() -> std::string {
      if (i + 1 >= argc) usage(a + " needs a value");
      return argv[++i];
    };
    auto whole = [&](long long min, long long max) {
      const std::string v = value();
      const auto n = drivers::parse_whole_number(v, min, max);
      if (!n) usage(drivers::whole_number_error(a, v, min, max));
      return static_cast<int>(*n);
    };
    if (a == "--help" || a == "-h") {
      std::printf("%s", kUsage);
      std::exit(0);
    } else if (a == "--stations") o.stations = whole(2, 8);
    else if (a == "--units") o.units = whole(4, 100000);
    else if (a == "--outages") o.outages = whole(0, 20);
    else if (a == "--outage-s") o.outage_s = whole(1, 3600);
    else if (a == "--no-kill") o.kill = false;
    else if (a == "--report") o.report = value();
    else if (a == "--keep") o.keep = value();
    else usage("unknown option " + a);
  }
  return o;
}

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

std::mutex print_mu;
template <typename... A>
void say(fmt::format_string<A...> f, A&&... args) {
  std::lock_guard lock(print_mu);
  std::printf("%s\n", fmt::format(f, std::forward<A>(args)...).c_str());
  std::fflush(stdout);
}

int broken = 0;
void check(bool ok, const std::string& what) {
  say("{} {}", ok ? "ok  " : "FAIL", what);
  if (!ok) ++broken;
}

void write_private(const std::filesystem::path& file, const std::string& text) {
  std::ofstream(file) << text;
  ::chmod(file.c_str(), 0600);
}

}  // namespace

int main(int argc, char** argv) {
  const Options o = parse(argc, argv);
  if (auto why = testing::PostgresServer::unavailable()) {
    std::printf("result=SKIP (%s)\n", why->c_str());
    return 0;
  }
  try {
    std::optional<testing::TempDir> temp;
    std::filesystem::path dir;
    if (o.keep.empty()) {
      temp.emplace("echoline-fleet");
      dir = temp->path();
    } else {
      dir = std::filesystem::absolute(o.keep);
      std::filesystem::create_directories(dir);
    }
    const auto t0 = Clock::now();
    testing::PostgresServer pg;
    say("database: PostgreSQL on 127.0.0.1:{} ({:.1f} s to initdb and start)", pg.port(), seconds_since(t0));
    {
      testing::ChildProcess::Options po;
      po.merge_stderr = true;
      auto mig = testing::ChildProcess::start(
          {testing::client_binary().string(), "central", "migrate", "--db", pg.admin_conninfo()}, po);
      std::string out;
      while (auto line = mig.read_line(60s)) out += *line + "\n";
      const auto code = mig.wait(10s);
      if (!code || *code != 0) throw std::runtime_error("echoline central migrate failed: " + out);
      say("database: {}", out.substr(0, out.find('\n')));
    }
    const std::string station_password = "fleet-station-secret-7Q";
    const std::string reader_password = "fleet-reader-secret-9Z";
    pg.psql("CREATE ROLE fleet_station LOGIN PASSWORD '" + station_password + "' IN ROLE echoline_station; "
            "CREATE ROLE fleet_reader LOGIN PASSWORD '" + reader_password + "' IN ROLE echoline_reader;");
    const std::filesystem::path settings = dir / "central.jsonc";
    write_private(settings, json({{"host", "127.0.0.1"}, {"port", pg.port()}, {"dbname", "echoline"},
                                  {"user", "fleet_station"}, {"password", station_password}, {"sslmode", "prefer"},
                                  {"connect_timeout_s", 2}, {"retry_min_s", 0.2}, {"retry_max_s", 2.0}})
                                .dump(2));
    const std::filesystem::path reader_settings = dir / "central-reader.jsonc";
    write_private(reader_settings, json({{"host", "127.0.0.1"}, {"port", pg.port()}, {"dbname", "echoline"},
                                         {"user", "fleet_reader"}, {"password", reader_password}})
                                       .dump(2));

    // One lot file for every simulator: the same units on every bench.
    const int total_units = o.units * o.stations;
    std::vector<std::unique_ptr<StationUnderTest>> stations;
    for (int s = 0; s < o.stations; ++s) {
      StationSetup setup;
      setup.work_dir = dir / fmt::format("station-{}", s + 1);
      std::filesystem::create_directories(setup.work_dir);
      setup.lot_size = total_units;
      setup.lot_name = "FLEET-LOT";
      setup.station_name = fmt::format("bench-{}", s + 1);
      setup.operator_name = fmt::format("operator-{}", s % 2 + 1);
      setup.central_settings = settings;
      setup.client_name = "echoline-fleet";
      stations.push_back(std::make_unique<StationUnderTest>(setup));
      stations.back()->start_simulator();
      stations.back()->start_daemon();
    }
    say("stations: {} daemons forwarding to the central database, {} units each", o.stations, o.units);

    std::atomic<int> done_units{0};
    std::atomic<bool> lot_over{false};
    std::vector<LotCounters> counters(static_cast<std::size_t>(o.stations));
    std::vector<std::string> retested;   // serials a second bench tests again
    std::vector<std::thread> threads;
    for (int s = 0; s < o.stations; ++s) {
      threads.emplace_back([&, s] {
        StationUnderTest& st = *stations[static_cast<std::size_t>(s)];
        LotRunner runner(st, counters[static_cast<std::size_t>(s)]);
        if (!runner.calibrate()) {
          say("FAIL station {}: no valid calibration", s + 1);
          return;
        }
        const auto serials = st.units();
        std::vector<std::string> mine(serials.begin() + s * o.units, serials.begin() + (s + 1) * o.units);
        // The first two units of the previous station's share are tested here again: retests
        // on another bench.
        if (s > 0) {
          for (int k = 0; k < 2; ++k) mine.push_back(serials[static_cast<std::size_t>((s - 1) * o.units + k)]);
        }
        for (std::size_t i = 0; i < mine.size(); ++i) {
          if (o.kill && s == 1 && i == mine.size() / 2) {
            runner.test(mine[i], 0.05);
            st.kill_daemon();
            say("station {}: echolined SIGKILLed while testing {}", s + 1, mine[i]);
            std::string rf;
            st.rf_off(&rf);
            st.start_daemon();
            say("station {}: echolined restarted", s + 1);
          }
          runner.test(mine[i]);
          const int n = ++done_units;
          const int all = total_units + 2 * (o.stations - 1);
          if (n % std::max(1, all / 10) == 0) say("progress: {} of {} units tested ({:.0f} s)", n, all, seconds_since(t0));
        }
      });
    }
    // The database goes away and comes back, spread over the lot.
    const int all_units = total_units + 2 * (o.stations - 1);
    for (int k = 0; k < o.outages; ++k) {
      const int at = (k + 1) * all_units / (o.outages + 1);
      while (done_units.load() < at) std::this_thread::sleep_for(50ms);
      pg.stop();
      say("database: stopped ({} of {} units tested); restarting in {} s", done_units.load(), all_units, o.outage_s);
      std::this_thread::sleep_for(std::chrono::seconds(o.outage_s));
      pg.start();
      say("database: running again");
    }
    for (auto& t : threads) t.join();
    lot_over = true;
    say("lot: every station done after {:.0f} s; waiting for the outboxes to empty", seconds_since(t0));

    // Wait until every outbox is empty.
    const auto wait0 = Clock::now();
    for (;;) {
      long long depth = 0;
      for (auto& st : stations) depth += st->status()["forwarding"].value("outbox_depth", 0LL);
      if (depth == 0) break;
      if (seconds_since(wait0) > 180) {
        check(false, fmt::format("the outboxes emptied within 180 s ({} runs still waiting)", depth));
        break;
      }
      std::this_thread::sleep_for(200ms);
    }
    say("forwarding: outboxes empty {:.1f} s after the lot", seconds_since(wait0));

    double commit_max = 0, wait_max = 0;
    for (int s = 0; s < o.stations; ++s) {
      const json f = stations[static_cast<std::size_t>(s)]->status()["forwarding"];
      const double mx = f["store_commit_ms"].value("max", 0.0);
      const double wait = f["store_commit_ms"].value("lock_wait_max", 0.0);
      commit_max = std::max(commit_max, mx);
      wait_max = std::max(wait_max, wait);
      say("station {}: {} runs recorded since its last start, store time per run max {:.1f} ms, of it waiting for "
          "the forwarder's lock max {:.1f} ms; forwarder {} (sent {}, already there {}, refused {})",
          s + 1, f["store_commit_ms"].value("runs", 0), mx, wait, f.value("state", ""), f.value("sent_this_start", 0),
          f.value("duplicates_this_start", 0), f.value("refused_this_start", 0));
      for (const auto& p : counters[static_cast<std::size_t>(s)].problems) say("station {} problem: {}", s + 1, p);
    }

    // Exactly once: every station's runs against the central database.
    auto reader_settings_loaded = central::load_settings(reader_settings);
    if (!reader_settings_loaded) throw std::runtime_error(reader_settings_loaded.error().message);
    auto reader = central::CentralReader::open(*reader_settings_loaded);
    if (!reader) throw std::runtime_error(reader.error().message);
    auto column = (*reader)->content_hashes();
    auto recomputed = (*reader)->document_hashes();
    if (!column || !recomputed) throw std::runtime_error("reading the central hashes failed");
    std::size_t station_runs = 0, missing = 0, differing = 0;
    std::set<std::string> seen;
    for (auto& st : stations) {
      auto store = store::RunStore::open_read_only(st->store_file());
      if (!store) throw std::runtime_error(store.error().message);
      auto runs = (*store)->runs_between("0000", "9999", false);
      if (!runs) throw std::runtime_error(runs.error().message);
      for (const auto& brief : *runs) {
        ++station_runs;
        seen.insert(brief.run_id);
        auto run = (*store)->load_run(brief.run_id);
        const std::string hash = central::run_document(*run).content_hash;
        auto c = column->find(brief.run_id);
        auto r = recomputed->find(brief.run_id);
        if (c == column->end()) {
          ++missing;
          say("missing from the central database: {}", brief.run_id);
        } else if (c->second != hash || r->second != hash) {
          ++differing;
          say("content differs: {} (station {}, central column {}, central document {})", brief.run_id, hash, c->second,
              r->second);
        }
      }
    }
    std::size_t extra = 0;
    for (const auto& [id, h] : *column) extra += seen.count(id) ? 0 : 1;
    say("exactly once: {} runs on the stations, {} in the central database", station_runs, column->size());
    check(missing == 0, fmt::format("every station run is in the central database ({} missing)", missing));
    check(extra == 0 && column->size() == station_runs,
          fmt::format("the central database holds no run the stations do not ({} extra)", extra));
    check(differing == 0, fmt::format("per-run content hashes agree: station, central column and the stored document "
                                      "({} differ)",
                                      differing));
    const std::string dup = pg.psql("SELECT count(*) - count(DISTINCT content_hash) FROM echoline.runs");
    check(dup.rfind("0", 0) == 0, "no content stored twice under two run ids (" + dup.substr(0, dup.find('\n')) + " duplicates)");
    say("store time per run (begin + save, forwarder running): max {:.1f} ms over every station; the longest a "
        "test waited for the forwarder's lock on the store: {:.1f} ms",
        commit_max, wait_max);

    // Reading it back: the lot across stations, and a retest on another bench.
    if (!o.report.empty() || true) {
      const std::string report = o.report.empty() ? (dir / "fleet-lot.html").string() : o.report;
      testing::ChildProcess::Options po;
      po.merge_stderr = true;
      auto rep = testing::ChildProcess::start(
          {testing::client_binary().string(), "report", "--lot", "FLEET-LOT", "--db", reader_settings.string(), "--recipe",
           (testing::source_dir() / "config/recipes/whip915.jsonc").string(), "--out", report},
          po);
      std::string out;
      while (auto line = rep.read_line(120s)) out += *line + "\n";
      const auto code = rep.wait(10s);
      std::ifstream in(report);
      const std::string html((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
      check(code && *code == 0 && html.find("<h2>Stations</h2>") != std::string::npos &&
                html.find("bench-" + std::to_string(o.stations)) != std::string::npos,
            "one lot report spans every station, with a Stations section: " + report);
      say("report: {}", out.substr(0, out.find('\n')));
      const std::string serial = stations[0]->units()[0];
      auto runs = testing::ChildProcess::start(
          {testing::client_binary().string(), "runs", "--serial", serial, "--db", reader_settings.string()}, po);
      std::string listing;
      while (auto line = runs.read_line(60s)) listing += *line + "\n";
      runs.wait(10s);
      check(listing.find("RETEST on another bench (before: bench-1)") != std::string::npos,
            "the unit's history spans stations and marks the retest on another bench:\n" + listing);
    }
    for (auto& st : stations) st->stop_daemon();
    std::printf("total_s=%.1f\nresult=%s (%d broken invariants)\n", seconds_since(t0), broken == 0 ? "PASS" : "FAIL", broken);
    return broken == 0 ? 0 : 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "echoline-fleet: %s\n", e.what());
    std::printf("result=FAIL (set-up or harness error: %s)\n", e.what());
    return 2;
  }
}
