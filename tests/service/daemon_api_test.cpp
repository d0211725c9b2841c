// echolined over its Unix socket against a real echoline-sim (instant profile): hello, status,
// calibration with prompts, unit tests with verdicts, refusals, bad requests, roles, faults.
#include <sys/socket.h>
#include <sys/un.h>

#include <fstream>
#include <iterator>
#include <thread>

#include <gtest/gtest.h>

#include "daemon/store/run_store.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

class DaemonApi : public ::testing::Test {
 protected:
  void SetUp() override {
    sim_.emplace("tiny-lot.jsonc");
    config_ = write_station_config(dir_.path(), *sim_);
    daemon_.emplace(config_);
  }
  Api connect() { return Api::connect(*daemon_); }
  // A calibration whose LOAD is answered with the OPEN left on the port (no directivity: it
  // comes out not valid). Returns the final event.
  json calibrate_leaving_the_open_for_the_load(Api& api) {
    json r = api.call("cal.start");
    if (!r.value("ok", false)) throw std::runtime_error("cal.start refused: " + r.dump());
    for (;;) {
      json e = api.next_event();
      if (e["event"] == "prompt") {
        sim_->connect_standard(e["standard"] == "LOAD" ? "OPEN" : e["standard"].get<std::string>());
        if (!api.call("cal.answer", {{"standard", e["standard"]}}).value("ok", false)) throw std::runtime_error("cal.answer refused");
      } else if (e["event"] == "result" || e["event"] == "error") {
        return e;
      }
    }
  }

  testing::TempDir dir_{"echoline-daemon"};
  std::optional<Sim> sim_;
  std::filesystem::path config_;
  std::optional<Daemon> daemon_;
};

// A calibration that comes out NOT VALID (the OPEN left on the port when the LOAD is asked for:
// no directivity) is what the refusal of the next test names, in operator words: not "no
// calibration yet", and no API call names.
TEST_F(DaemonApi, AfterACalibrationThatIsNotValidTheRefusalSaysSoAndWhy) {
  Api api = connect();
  const json end = calibrate_leaving_the_open_for_the_load(api);
  ASSERT_EQ(end["event"], "result") << end.dump();
  ASSERT_FALSE(end["calibration"]["valid"].get<bool>()) << end.dump();
  const std::string id = end["calibration"]["id"];

  sim_->connect_unit("TINY-01");
  json refused = api.call("test.start", {{"serial", "TINY-01"}});
  ASSERT_FALSE(refused.value("ok", true)) << refused.dump();
  EXPECT_EQ(refused["error"]["code"], "calibration_due");
  const std::string message = refused["error"]["message"];
  EXPECT_NE(message.find("the last calibration (" + id + ") was not valid: "), std::string::npos) << message;
  EXPECT_EQ(message.find("no calibration yet"), std::string::npos) << message;
  EXPECT_EQ(message.find("cal.start"), std::string::npos) << message;
  EXPECT_NE(message.find("calibrate the station before testing"), std::string::npos) << message;

  json status = api.call("status");
  EXPECT_NE(status["result"]["calibration"]["reason"].get<std::string>().find("was not valid"), std::string::npos)
      << status.dump();
}

// A calibration that comes out NOT VALID after a valid one (the bench changed under it) leaves the
// station due: the older calibration no longer describes the bench, and a restart, which loads
// the newest calibration from the store, must not see a different station than the running one.
// Common practice, no source: a failed calibration blocks testing until one succeeds.
TEST_F(DaemonApi, ACalibrationThatIsNotValidAfterAValidOneStopsTestingUntilTheNext) {
  Api api = connect();
  ASSERT_TRUE(calibrate(api, *sim_)["calibration"]["valid"].get<bool>());
  sim_->connect_unit("TINY-01");
  json ok = api.call("test.start", {{"serial", "TINY-01"}});
  ASSERT_TRUE(ok.value("ok", false)) << ok.dump();
  for (json e = api.next_event(); e["event"] != "result"; e = api.next_event()) {
  }

  const json end = calibrate_leaving_the_open_for_the_load(api);
  ASSERT_FALSE(end["calibration"]["valid"].get<bool>()) << end.dump();

  sim_->connect_unit("TINY-02");
  json refused = api.call("test.start", {{"serial", "TINY-02"}});
  ASSERT_FALSE(refused.value("ok", true)) << refused.dump();
  EXPECT_EQ(refused["error"]["code"], "calibration_due") << refused.dump();
  EXPECT_NE(refused["error"]["message"].get<std::string>().find("was not valid"), std::string::npos) << refused.dump();

  // After a restart the station is due for the same reason, in the same words.
  daemon_.reset();
  daemon_.emplace(config_);
  Api again = connect();
  json refused_again = again.call("test.start", {{"serial", "TINY-02"}});
  ASSERT_FALSE(refused_again.value("ok", true)) << refused_again.dump();
  EXPECT_EQ(refused_again["error"]["message"], refused["error"]["message"]) << refused_again.dump();

  // A valid calibration clears it.
  ASSERT_TRUE(calibrate(again, *sim_)["calibration"]["valid"].get<bool>());
  sim_->connect_unit("TINY-02");
  EXPECT_TRUE(again.call("test.start", {{"serial", "TINY-02"}}).value("ok", false));
}

// Run ids end in a number that counts on across daemon restarts without a gap (README, "Run
// ids"): an auditor reading …-000002 then …-000005 would ask where two runs went. Each run's row
// is written twice (ahead of the sweep, then when it ends), so the store's row numbers cannot
// serve as the count.
TEST_F(DaemonApi, RunNumbersCountOnWithoutAGapAfterARestart) {
  auto number = [](const json& run) {
    const std::string id = run.value("run_id", std::string());
    return std::stol(id.substr(id.rfind('-') + 1));
  };
  Api api = connect();
  ASSERT_EQ(calibrate(api, *sim_)["event"], "result");
  const long first = number(test_unit(api, *sim_, "TINY-01", "LOT-N"));
  const long second = number(test_unit(api, *sim_, "TINY-02", "LOT-N"));
  EXPECT_EQ(second, first + 1);
  daemon_.reset();
  daemon_.emplace(config_);
  Api again = connect();
  const long third = number(test_unit(again, *sim_, "TINY-03", "LOT-N"));
  EXPECT_EQ(third, second + 1);
}

// An operator who answers that the standard is not connected cancels the calibration; the error
// says so once, in order: what was cancelled, then why ("calibration: cancelled: OPEN not
// connected"), not "calibration: calibration cancelled". Nothing is stored as valid.
TEST_F(DaemonApi, ACalibrationCancelledAtAPromptSaysSoOnce) {
  Api api = connect();
  ASSERT_TRUE(api.call("cal.start").value("ok", false));
  json end;
  for (;;) {
    json e = api.next_event();
    if (e["event"] == "prompt") {
      ASSERT_TRUE(api.call("cal.answer", {{"standard", e["standard"]}, {"connected", false}}).value("ok", false));
    } else if (e["event"] == "result" || e["event"] == "error") {
      end = e;
      break;
    }
  }
  ASSERT_EQ(end["event"], "error") << end.dump();
  const std::string message = end["error"]["message"];
  EXPECT_EQ(message, "calibration: cancelled: OPEN not connected") << end.dump();
  EXPECT_FALSE(api.call("status")["result"]["calibration"]["present"].get<bool>());
}

TEST_F(DaemonApi, HelloNamesStationAndStatusShowsHealthyInstruments) {
  Api api = connect();
  json h = api.call("hello", {{"role", "operator"}, {"client", "test"}});
  ASSERT_TRUE(h["ok"].get<bool>()) << h.dump();
  EXPECT_EQ(h["result"]["station"], "e2e-bench");
  EXPECT_EQ(h["result"]["api"], 1);
  EXPECT_EQ(h["id"], 1);

  json s = api.call("status");
  ASSERT_TRUE(s["ok"].get<bool>()) << s.dump();
  ASSERT_EQ(s["result"]["instruments"].size(), 2u);
  for (const auto& i : s["result"]["instruments"]) {
    EXPECT_TRUE(i["healthy"].get<bool>()) << i.dump();
    EXPECT_NE(i["identity"].get<std::string>().find("Echoline"), std::string::npos);   // sim *IDN? manufacturer
  }
  EXPECT_TRUE(s["result"]["calibration"]["due"].get<bool>());   // fresh store: no calibration
  EXPECT_TRUE(s["result"]["busy"].is_null());
  EXPECT_EQ(s["result"]["recipe"]["name"], "whip915");
}

TEST_F(DaemonApi, TestIsRefusedUntilCalibrated) {
  Api api = connect();
  sim_->connect_unit("TINY-01");
  json r = api.call("test.start", {{"serial", "TINY-01"}});
  ASSERT_FALSE(r["ok"].get<bool>());
  EXPECT_EQ(r["error"]["code"], "calibration_due");
  // The message is shown to the operator: plain words, no API call names.
  const std::string message = r["error"]["message"];
  EXPECT_NE(message.find("no calibration yet; calibrate the station before testing"), std::string::npos) << message;
  EXPECT_EQ(message.find("cal.start"), std::string::npos) << message;
}

TEST_F(DaemonApi, CalibrationPromptsEachStandardThenUnitsGetVerdicts) {
  Api api = connect();
  json r = api.call("cal.start");
  ASSERT_TRUE(r["ok"].get<bool>()) << r.dump();
  const int points = r["result"]["points"];
  std::vector<std::string> prompted;
  json last;
  for (;;) {
    json e = api.next_event();
    if (e["event"] == "prompt") {
      prompted.push_back(e["standard"]);
      sim_->connect_standard(e["standard"]);
      ASSERT_TRUE(api.call("cal.answer", {{"standard", e["standard"]}})["ok"].get<bool>());
    } else if (e["event"] == "result" || e["event"] == "error") {
      last = e;
      break;
    }
  }
  // whip915 uses OPEN+SHORT reference (calibration.use_short true), then LOAD.
  EXPECT_EQ(prompted, (std::vector<std::string>{"OPEN", "SHORT", "LOAD"}));
  ASSERT_EQ(last["event"], "result") << last.dump();
  EXPECT_TRUE(last["calibration"]["valid"].get<bool>()) << last.dump();

  std::map<std::string, std::string> verdicts;
  for (const std::string serial : {"TINY-01", "TINY-02", "TINY-05"}) {
    int progress = 0;
    json run = test_unit(api, *sim_, serial, "TINY", &progress);
    // First and last point always, the rest at most every 40 ms (API.md, "progress").
    EXPECT_GE(progress, 2) << serial;
    EXPECT_LE(progress, points) << serial;
    EXPECT_EQ(run["serial"], serial);
    EXPECT_EQ(run["calibration_id"], last["calibration"]["id"]);
    verdicts[serial] = run["verdict"];
    EXPECT_NE(run["verdict"], "aborted") << run.dump();
  }
  // TINY-02 is cut too long and TINY-05 has a shorted feed in the tiny lot (sim truth).
  EXPECT_EQ(sim_->control({{"cmd", "truth"}, {"unit", "TINY-02"}, {"frequencies_hz", {915e6}}})["defect"], "too-long");
  EXPECT_EQ(verdicts["TINY-02"], "fail");
  EXPECT_EQ(verdicts["TINY-05"], "fail");

  // A second test of the same serial is a retest; history keeps both.
  json again = test_unit(api, *sim_, "TINY-01", "TINY");
  EXPECT_TRUE(again["retest"].get<bool>());
  json h = api.call("runs.history", {{"serial", "TINY-01"}});
  ASSERT_TRUE(h["ok"].get<bool>());
  EXPECT_EQ(h["result"]["runs"].size(), 2u);
  json lot = api.call("runs.lot", {{"lot", "TINY"}});
  EXPECT_EQ(lot["result"]["runs"].size(), 4u);
}

TEST_F(DaemonApi, EngineerExportsAndLotReportComeBackInTheReplyNamingTheUnits) {
  Api api = connect();
  ASSERT_EQ(calibrate(api, *sim_)["event"], "result");
  json run = test_unit(api, *sim_, "TINY-01", "TINY");
  ASSERT_TRUE(api.call("hello", {{"role", "engineer"}})["ok"].get<bool>());
  json csv = api.call("export", {{"scope", "lot"}, {"key", "TINY"}, {"format", "csv"}});
  ASSERT_TRUE(csv["ok"].get<bool>()) << csv.dump();
  EXPECT_EQ(csv["result"]["media_type"], "text/csv");
  EXPECT_EQ(csv["result"]["runs"], 1);
  json js = api.call("export", {{"scope", "run"}, {"key", run["run_id"]}, {"format", "json"}});
  ASSERT_TRUE(js["ok"].get<bool>()) << js.dump();
  EXPECT_EQ(js["result"]["media_type"], "application/json");
  json html = api.call("report.lot", {{"lot", "TINY"}});
  ASSERT_TRUE(html["ok"].get<bool>()) << html.dump().substr(0, 400);
  EXPECT_EQ(html["result"]["media_type"], "text/html");
  for (const json* r : {&csv, &js, &html}) {
    const std::string content = (*r)["result"]["content"];
    EXPECT_NE(content.find("TINY-01"), std::string::npos);
    EXPECT_EQ((*r)["result"]["bytes"], content.size());
  }
  // The JSON export reads back as the run with every point.
  json doc = json::parse(js["result"]["content"].get<std::string>());
  EXPECT_EQ(doc["runs"][0]["points"].size(), run["points_count"]);
  EXPECT_EQ(api.call("report.lot", {{"lot", "NO-SUCH-LOT"}})["error"]["code"], "not_found");
  EXPECT_EQ(api.call("export", {{"scope", "run"}, {"key", "no-such-run"}, {"format", "csv"}})["error"]["code"],
            "not_found");
  json bad = api.call("export", {{"scope", "lot"}, {"key", "TINY"}, {"format", "xls"}});
  EXPECT_EQ(bad["error"]["code"], "bad_request") << bad.dump();
  EXPECT_NE(bad["error"]["message"].get<std::string>().find("\"xls\""), std::string::npos) << bad.dump();
}

TEST_F(DaemonApi, RunGetReturnsTheRunWithItsPoints) {
  Api api = connect();
  ASSERT_EQ(calibrate(api, *sim_)["event"], "result");
  json run = test_unit(api, *sim_, "TINY-02", "TINY");
  json r = api.call("run.get", {{"run_id", run["run_id"]}});   // an operator call
  ASSERT_TRUE(r["ok"].get<bool>()) << r.dump().substr(0, 400);
  const json& got = r["result"]["run"];
  EXPECT_EQ(got["run_id"], run["run_id"]);
  EXPECT_EQ(got["serial"], "TINY-02");
  EXPECT_EQ(got["verdict"], run["verdict"]);
  ASSERT_EQ(got["points"].size(), 221u);   // whip915: 860–970 MHz in 221 points
  ASSERT_EQ(got["point_columns"][0], "frequency_hz");
  ASSERT_EQ(got["point_columns"][2], "return_loss_db");
  EXPECT_DOUBLE_EQ(got["points"][0][0].get<double>(), 860e6);
  EXPECT_DOUBLE_EQ(got["points"][220][0].get<double>(), 970e6);
  for (const auto& p : got["points"]) EXPECT_TRUE(p[2].is_number()) << p.dump();
  EXPECT_EQ(api.call("run.get", {{"run_id", "no-such-run"}})["error"]["code"], "not_found");
  EXPECT_EQ(api.call("run.get")["error"]["code"], "bad_request");
}

TEST_F(DaemonApi, BadRequestsGetErrorRepliesAndTheConnectionStaysUsable) {
  Api api = connect();
  struct Case {
    std::string line, code;
  };
  const std::vector<Case> cases = {
      {"this is not json", "bad_request"},
      {"[1,2,3]", "bad_request"},
      {R"({"v":1,"call":"status"})", "bad_request"},                      // no id
      {R"({"v":1,"id":5})", "bad_request"},                               // no call
      {R"({"v":1,"id":{"a":1},"call":"status"})", "bad_request"},         // id of the wrong type
      {R"({"v":1,"id":6,"call":"self.destruct"})", "unknown_call"},
      {R"({"v":1,"id":7,"call":"test.start","args":{"serial":42}})", "bad_request"},
      {R"({"v":1,"id":8,"call":"test.start","args":"x"})", "bad_request"},
      {R"({"v":2,"id":9,"call":"status"})", "unsupported_version"},
      {R"({"v":1,"id":10,"call":"test.start","args":{"serial":"bad/serial"}})", "invalid_serial"},
      {"{\"v\":1,\"id\":11,\"call\":\"runs.history\",\"args\":{\"serial\":\"\xff\xfe\"}}", "bad_request"},   // not UTF-8
  };
  for (const auto& c : cases) {
    api.send_raw(c.line + "\n");
    json reply = api.next_message(10s);
    ASSERT_TRUE(reply.contains("ok")) << c.line;
    EXPECT_FALSE(reply["ok"].get<bool>()) << c.line;
    EXPECT_EQ(reply["error"]["code"], c.code) << c.line << " -> " << reply.dump();
    EXPECT_FALSE(reply["error"]["message"].get<std::string>().empty());
  }
  EXPECT_TRUE(api.call("status")["ok"].get<bool>());   // still usable
}

TEST_F(DaemonApi, OversizedLineIsRefusedAndTheConnectionClosed) {
  Api api = connect();
  std::string huge = R"({"v":1,"id":1,"call":"status","args":{"pad":")" + std::string(70 * 1024, 'x') + "\"}}\n";
  api.send_raw(huge);
  json reply = api.next_message(10s);
  EXPECT_EQ(reply["error"]["code"], "too_large");
  EXPECT_FALSE(api.read_line(5s).has_value());   // closed
  // The daemon itself is fine.
  Api other = connect();
  EXPECT_TRUE(other.call("status")["ok"].get<bool>());
}

TEST_F(DaemonApi, EngineerCallsAreForbiddenToOperators) {
  Api api = connect();
  json r = api.call("recipe.select", {{"path", (testing::source_dir() / "config/recipes/whip915.jsonc").string()}});
  EXPECT_EQ(r["error"]["code"], "forbidden");
  r = api.call("export", {{"scope", "lot"}, {"key", "X"}, {"format", "csv"}});
  EXPECT_EQ(r["error"]["code"], "forbidden");
  // No token file configured: engineer role is granted on the local socket.
  ASSERT_TRUE(api.call("hello", {{"role", "engineer"}})["ok"].get<bool>());
  r = api.call("recipe.select", {{"path", (testing::source_dir() / "config/recipes/whip915.jsonc").string()}});
  EXPECT_TRUE(r["ok"].get<bool>()) << r.dump();
  r = api.call("recipe.select", {{"path", (dir_.path() / "missing.jsonc").string()}});
  EXPECT_EQ(r["error"]["code"], "config");
}

TEST_F(DaemonApi, BusyWhileCalibratingStatusStillAnswersAndCancelEndsIt) {
  Api api = connect();
  json r = api.call("cal.start");
  ASSERT_TRUE(r["ok"].get<bool>());
  json prompt = api.next_event();
  ASSERT_EQ(prompt["event"], "prompt");

  Api second = connect();
  json busy = second.call("test.start", {{"serial", "TINY-01"}});
  EXPECT_EQ(busy["error"]["code"], "busy");
  EXPECT_NE(busy["error"]["message"].get<std::string>().find("calibration"), std::string::npos);
  json s = second.call("status");
  EXPECT_EQ(s["result"]["busy"]["kind"], "calibration");
  EXPECT_EQ(second.call("cal.answer", {{"standard", "LOAD"}})["error"]["code"], "wrong_standard");

  EXPECT_TRUE(second.call("cancel")["ok"].get<bool>());
  json end = api.next_event();
  EXPECT_EQ(end["event"], "error");
  EXPECT_TRUE(second.call("cal.status")["result"]["due"].get<bool>());   // nothing stored as valid
  EXPECT_EQ(second.call("cancel")["error"]["code"], "idle");
}

TEST_F(DaemonApi, InstrumentDroppingMidRunAbortsTheRunAndTheNextUnitWorks) {
  Api api = connect();
  ASSERT_EQ(calibrate(api, *sim_)["event"], "result");
  sim_->connect_unit("TINY-01");
  json r = api.call("test.start", {{"serial", "TINY-01"}});
  ASSERT_TRUE(r["ok"].get<bool>());
  json e = api.next_event();
  ASSERT_EQ(e["event"], "progress");
  // Mid-run: the source now hangs up instead of replying.
  ASSERT_TRUE(sim_->control({{"cmd", "fault"}, {"role", "source"}, {"kind", "drop"}, {"probability", 1}})["ok"].get<bool>());
  json run;
  for (;;) {
    e = api.next_event();
    if (e["event"] == "result") {
      run = e["run"];
      break;
    }
  }
  EXPECT_EQ(run["verdict"], "aborted");   // never a pass
  EXPECT_NE(run["reason"].get<std::string>().find("siggen"), std::string::npos) << run["reason"];   // names the instrument
  EXPECT_LT(run["points_count"].get<int>(), r["result"]["points"].get<int>());

  ASSERT_TRUE(sim_->control({{"cmd", "clear-faults"}})["ok"].get<bool>());
  json next = test_unit(api, *sim_, "TINY-03");
  EXPECT_NE(next["verdict"], "aborted") << next.dump();
  json h = api.call("runs.history", {{"serial", "TINY-01"}});
  ASSERT_EQ(h["result"]["runs"].size(), 1u);   // the aborted run is stored too
  EXPECT_EQ(h["result"]["runs"][0]["verdict"], "aborted");
}

TEST_F(DaemonApi, SigtermStopsCleanlyAndRemovesTheSocket) {
  Api api = connect();
  ASSERT_TRUE(api.call("cal.start")["ok"].get<bool>());
  ASSERT_EQ(api.next_event()["event"], "prompt");   // a job is waiting when the signal comes
  EXPECT_EQ(daemon_->process().terminate(10s), 0);
  EXPECT_FALSE(std::filesystem::exists(daemon_->unix_path()));
}

TEST(DaemonStart, StaleSocketIsReplacedAndTokenGuardsEngineerRole) {
  testing::TempDir dir{"echoline-daemon"};
  Sim sim("tiny-lot.jsonc");
  const auto token_file = dir / "token";
  std::ofstream(token_file) << "0123456789abcdef0123\n";
  auto config = write_station_config(dir.path(), sim, "whip915.jsonc",
                                     json({{"token_file", token_file.string()}, {"tcp_port", 0}}).dump());
  // A socket file nobody listens on, as a crashed daemon leaves it.
  {
    int fd = ::socket(AF_UNIX, SOCK_STREAM, 0);
    sockaddr_un addr{};
    addr.sun_family = AF_UNIX;
    std::strncpy(addr.sun_path, (dir / "echolined.sock").c_str(), sizeof(addr.sun_path) - 1);
    ASSERT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)), 0);
    ::close(fd);
  }
  Daemon daemon(config, {"--tcp-port", "auto"});
  Api api = Api::connect(daemon);
  EXPECT_TRUE(api.call("status")["ok"].get<bool>());
  EXPECT_EQ(api.call("hello", {{"role", "engineer"}})["error"]["code"], "unauthorized");
  EXPECT_EQ(api.call("hello", {{"role", "engineer"}, {"token", "0123456789abcdef0124"}})["error"]["code"], "unauthorized");
  EXPECT_TRUE(api.call("hello", {{"role", "engineer"}, {"token", "0123456789abcdef0123"}})["ok"].get<bool>());

  // Loopback TCP carries the same protocol.
  ASSERT_FALSE(daemon.tcp_address().empty());
  Api tcp(LineSocket::tcp(daemon.tcp_address()));
  EXPECT_EQ(tcp.call("status")["result"]["station"], "e2e-bench");
}

}  // namespace
}  // namespace echoline::e2e

namespace echoline::e2e {
namespace {

// Fast capture through the daemon: calibration and a unit in the same mode, one trace per sweep.
TEST(DaemonFastCapture, CalibratesAndJudgesAUnitFromOneTrace) {
  testing::TempDir dir("echoline-daemon-fast");
  Sim sim("tiny-lot.jsonc");
  Daemon daemon(write_station_config(dir.path(), sim, "whip915-fast.jsonc"));
  Api api = Api::connect(daemon);
  json status = api.call("status");
  ASSERT_EQ(status["result"]["recipe"]["name"], "whip915-fast") << status.dump();
  json cal = calibrate(api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  EXPECT_TRUE(cal["calibration"]["valid"].get<bool>()) << cal.dump();

  const json before = sim.control({{"cmd", "status"}});
  json run = test_unit(api, sim, "TINY-01", "TINY");
  const json after = sim.control({{"cmd", "status"}});
  EXPECT_NE(run["verdict"], "aborted") << run.dump();
  EXPECT_EQ(run["points_count"], 221) << run.dump();
  // One trace read instead of a marker query per point: the receiver answers a handful of
  // queries per unit (sweep *OPC?, trace, error checks), not the step sweep's 400.
  const double replies = after["instruments"]["receiver"]["replies"].get<double>() -
                         before["instruments"]["receiver"]["replies"].get<double>();
  EXPECT_LT(replies, 10) << replies;
}

}  // namespace
}  // namespace echoline::e2e

namespace echoline::e2e {
namespace {

// The newest calibration in the station's store once the daemon has stopped (fails the test if
// there is none).
core::CalibrationRecord latest_stored_calibration(const std::filesystem::path& dir) {
  auto store = store::RunStore::open_read_only(dir / "data" / "e2e-bench.sqlite");
  EXPECT_TRUE(store.ok()) << store.error().message;
  if (!store.ok()) return {};
  auto cal = (*store)->latest_calibration();
  EXPECT_TRUE(cal.ok() && cal->has_value());
  if (!cal.ok() || !cal->has_value()) return {};
  return **cal;
}

// The kit's mismatch standards in the calibration (recipe whip915-mm, calibration.use_mismatch):
// the operator is prompted for each by name and in plain words, the simulator connects them with
// its bench physics, and the store keeps their traces and the kit's definitions.
TEST(DaemonMismatch, CalibrationMeasuresTheMismatchStandardsAndStoresTheirTraces) {
  testing::TempDir dir("echoline-daemon-mm");
  Sim sim("tiny-lot.jsonc");
  std::optional<Daemon> daemon;
  daemon.emplace(write_station_config(dir.path(), sim, "whip915-mm.jsonc"));
  Api api = Api::connect(*daemon);
  json status = api.call("status");
  const json& listed = status["result"]["calibration"]["standards"];
  ASSERT_EQ(listed.size(), 5u) << status.dump();
  EXPECT_EQ(listed[3]["name"], "MISMATCH-A");
  EXPECT_EQ(listed[4]["description"], "61.1 ohm termination, 137 ps offset");
  EXPECT_EQ(listed[0]["description"], "");

  json r = api.call("cal.start");
  ASSERT_TRUE(r["ok"].get<bool>()) << r.dump();
  EXPECT_EQ(r["result"]["standards"].size(), 5u);
  std::vector<std::string> prompted;
  std::map<std::string, std::string> messages;
  json last;
  for (;;) {
    json e = api.next_event();
    if (e["event"] == "prompt") {
      prompted.push_back(e["standard"]);
      messages[e["standard"]] = e["message"];
      sim.connect_standard(e["standard"]);
      ASSERT_TRUE(api.call("cal.answer", {{"standard", e["standard"]}})["ok"].get<bool>());
    } else if (e["event"] == "result" || e["event"] == "error") {
      last = e;
      break;
    }
  }
  EXPECT_EQ(prompted, (std::vector<std::string>{"OPEN", "SHORT", "LOAD", "MISMATCH-A", "MISMATCH-B"}));
  EXPECT_EQ(messages["MISMATCH-A"], "connect the MISMATCH-A standard (61.1 ohm termination, no offset) to the test port, then answer");
  EXPECT_EQ(messages["OPEN"], "connect the OPEN standard to the test port, then answer");
  ASSERT_EQ(last["event"], "result") << last.dump();
  EXPECT_TRUE(last["calibration"]["valid"].get<bool>()) << last.dump();
  json run = test_unit(api, sim, "TINY-01", "TINY");   // the calibration judges units as before
  EXPECT_NE(run["verdict"], "aborted") << run.dump();
  ASSERT_EQ(daemon->process().terminate(30s), 0);
  daemon.reset();

  const core::CalibrationRecord c = latest_stored_calibration(dir.path());
  ASSERT_FALSE(c.traces.empty());
  for (const char* name : {"OPEN", "SHORT", "LOAD", "MISMATCH-A", "MISMATCH-B"}) {
    ASSERT_EQ(c.traces.count(name), 1u) << name;
    EXPECT_EQ(c.traces.at(name).size(), 221u) << name;
  }
  // The kit's definitions travel with the record, for offline recomputation.
  ASSERT_EQ(c.budget.mismatch.size(), 2u);
  EXPECT_EQ(c.budget.mismatch[1].name, "MISMATCH-B");
  EXPECT_DOUBLE_EQ(c.budget.mismatch[1].magnitude, 0.1);
  EXPECT_NEAR(c.budget.mismatch[1].offset_delay_s, 137e-12, 1e-20);
  EXPECT_DOUBLE_EQ(c.budget.mismatch[0].magnitude_tolerance, 0.002);
  // |Gamma| 0.1 is a return loss of 20 dB (definition): the mismatch reads about 20 dB below the
  // OPEN, give or take the 35 dB coupler's leakage (20 log10(1 +- 0.018/0.1): -1.7/+1.4 dB).
  // The eighth-wave offset turns B's reflection against the leakage, so B's ripple differs from A's.
  const auto& open = c.traces.at("OPEN");
  const auto& a = c.traces.at("MISMATCH-A");
  const auto& b = c.traces.at("MISMATCH-B");
  double mean_below = 0, most_apart = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    EXPECT_EQ(a[i].frequency_hz, open[i].frequency_hz);
    const double below = open[i].raw_dbm - a[i].raw_dbm;
    EXPECT_GT(below, 18.0) << i;
    EXPECT_LT(below, 22.5) << i;
    mean_below += below / static_cast<double>(a.size());
    most_apart = std::max(most_apart, std::abs(a[i].raw_dbm - b[i].raw_dbm));
  }
  EXPECT_NEAR(mean_below, 20.0, 1.0);
  EXPECT_GT(most_apart, 0.5);
}

// With the simulator's calibration switch in the station the daemon selects every standard
// itself (sim-switch positions 5 and 6 are the mismatch standards): no prompt, five traces.
TEST(DaemonMismatch, CalibrationSwitchSelectsTheMismatchStandards) {
  testing::TempDir dir("echoline-daemon-mm-switch");
  Sim sim("tiny-lot.jsonc");
  auto config = write_station_config(dir.path(), sim, "whip915-mm.jsonc");
  json cfg = json::parse(std::ifstream(config));
  cfg["instruments"].push_back({{"role", "switch"}, {"name", "calswitch"}, {"address", sim.endpoint("switch")},
                                {"profile", (testing::source_dir() / "config/instruments/sim-switch.jsonc").string()}});
  std::ofstream(config) << cfg.dump(2) << "\n";
  std::optional<Daemon> daemon;
  daemon.emplace(config);
  Api api = Api::connect(*daemon);
  ASSERT_TRUE(api.call("cal.start")["ok"].get<bool>());
  json last;
  int prompts = 0;
  for (;;) {
    json e = api.next_event();
    if (e["event"] == "prompt") ++prompts;
    if (e["event"] == "result" || e["event"] == "error") {
      last = e;
      break;
    }
  }
  EXPECT_EQ(prompts, 0);
  ASSERT_EQ(last["event"], "result") << last.dump();
  EXPECT_TRUE(last["calibration"]["valid"].get<bool>()) << last.dump();
  ASSERT_EQ(daemon->process().terminate(30s), 0);
  daemon.reset();
  const core::CalibrationRecord c = latest_stored_calibration(dir.path());
  ASSERT_FALSE(c.traces.empty());
  const auto& traces = c.traces;
  const auto& open = traces.at("OPEN");
  for (const char* name : {"MISMATCH-A", "MISMATCH-B"}) {
    // 20 dB below the OPEN on average (|Gamma| 0.1): the switch connected the mismatch, not
    // another standard or the empty DUT socket.
    const auto& m = traces.at(name);
    ASSERT_EQ(m.size(), open.size()) << name;
    double below = 0;
    for (std::size_t i = 0; i < m.size(); ++i) below += (open[i].raw_dbm - m[i].raw_dbm) / static_cast<double>(m.size());
    EXPECT_NEAR(below, 20.0, 1.5) << name;
  }
}

// A calibration switch that refuses connections (port 1 on loopback: nobody listens) ends the
// calibration with that cause named, not with "not connected" from the switch session an
// earlier failure had closed.
TEST(DaemonApiSwitch, ACalibrationSwitchThatRefusesConnectionsIsNamedWithItsCause) {
  testing::TempDir dir("echoline-daemon-switch-refused");
  Sim sim("tiny-lot.jsonc");
  auto config = write_station_config(dir.path(), sim);
  json cfg = json::parse(std::ifstream(config));
  cfg["instruments"].push_back({{"role", "switch"}, {"name", "calswitch"}, {"address", "tcp://127.0.0.1:1"},
                                {"profile", (testing::source_dir() / "config/instruments/sim-switch.jsonc").string()}});
  std::ofstream(config) << cfg.dump(2) << "\n";
  Daemon daemon(config);
  Api api = Api::connect(daemon);
  ASSERT_TRUE(api.call("cal.start").value("ok", false));
  json last;
  for (;;) {
    json e = api.next_event();
    if (e["event"] == "result" || e["event"] == "error") {
      last = e;
      break;
    }
  }
  ASSERT_EQ(last["event"], "error") << last.dump();
  const std::string message = last["error"].value("message", "");
  EXPECT_NE(message.find("calswitch"), std::string::npos) << message;
  EXPECT_NE(message.find("refused"), std::string::npos) << message;
  EXPECT_EQ(message.find("closed after an earlier error"), std::string::npos) << message;
}

// A station whose kit has no mismatch standards refuses a recipe that asks for them, naming the
// recipe key and the kit file: at recipe.select, and at start-up (exit 2, a configuration error).
TEST(DaemonMismatch, RecipeAskingForMismatchIsRefusedWhenTheKitHasNone) {
  testing::TempDir dir("echoline-daemon-mm-refused");
  Sim sim("tiny-lot.jsonc");
  const auto token_file = dir / "token";
  std::ofstream(token_file) << "0123456789abcdef0123\n";
  const auto src = testing::source_dir();
  const auto generic = src / "config/kits/generic-conservative.jsonc";
  auto config = write_station_config(dir.path(), sim, "whip915.jsonc", json({{"token_file", token_file.string()}}).dump());
  json cfg = json::parse(std::ifstream(config));
  cfg["calibration_kit"] = generic.string();
  std::ofstream(config) << cfg.dump(2) << "\n";
  {
    Daemon daemon(config);
    Api api = Api::connect(daemon);
    ASSERT_TRUE(api.call("hello", {{"role", "engineer"}, {"token", "0123456789abcdef0123"}})["ok"].get<bool>());
    json r = api.call("recipe.select", {{"path", (src / "config/recipes/whip915-mm.jsonc").string()}});
    ASSERT_FALSE(r["ok"].get<bool>()) << r.dump();
    const std::string m = r["error"]["message"];
    EXPECT_NE(m.find("/calibration/use_mismatch"), std::string::npos) << m;
    EXPECT_NE(m.find(generic.string()), std::string::npos) << m;
    EXPECT_EQ(api.call("status")["result"]["recipe"]["name"], "whip915");   // the station keeps its recipe
    EXPECT_EQ(daemon.process().terminate(30s), 0);
  }
  cfg["recipe"] = (src / "config/recipes/whip915-mm.jsonc").string();
  std::ofstream(config) << cfg.dump(2) << "\n";
  testing::ChildProcess::Options po;
  po.merge_stderr = true;
  auto child = testing::ChildProcess::start({testing::daemon_binary().string(), "--config", config.string()}, po);
  std::string text;
  while (auto line = child.read_line(30s)) text += *line + "\n";
  EXPECT_EQ(child.wait(10s), 2) << text;
  EXPECT_NE(text.find("/calibration/use_mismatch"), std::string::npos) << text;
  EXPECT_NE(text.find("generic-conservative.jsonc"), std::string::npos) << text;
}

}  // namespace
}  // namespace echoline::e2e
