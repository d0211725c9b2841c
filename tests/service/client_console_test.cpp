// The operator console end to end: echoline-sim (instant bench, tiny lot) + echolined + the
// `echoline station` process, fed from a pipe like a scripted barcode scanner, and on a
// pseudo-terminal like a person. Verdicts are scored against the simulator's ground truth.
#include <gtest/gtest.h>
#include <poll.h>
#include <pty.h>
#include <sys/wait.h>
#include <unistd.h>

#include <csignal>
#include <cstring>
#include <fstream>
#include <map>
#include <memory>
#include <regex>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "daemon/client/line_connection.hpp"
#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

using nlohmann::json;

class ConsoleBench : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::make_unique<TempDir>("echoline-console");
    const auto src = source_dir();
    ChildProcess::Options so;
    sim_ = std::make_unique<ChildProcess>(ChildProcess::start(
        {sim_binary().string(), "--config", (src / "config/sim/instant.jsonc").string(), "--lot",
         (src / "config/sim/lots/tiny-lot.jsonc").string(), "--log-file", (*dir_ / "sim.log").string()},
        so));
    std::map<std::string, std::string> addr;
    for (;;) {
      auto line = sim_->read_line(20s);
      ASSERT_TRUE(line.has_value()) << "echoline-sim did not print ready";
      if (*line == "ready") break;
      auto f = parse_fields(*line);
      if (f.count("role")) addr[f["role"]] = f["address"];
    }
    ASSERT_TRUE(addr.count("source") && addr.count("receiver") && addr.count("control"));
    control_ = addr["control"];
    config_ = (*dir_ / "station.jsonc").string();
    std::ofstream(config_) << json{
        {"station", "test-bench"},
        {"data_dir", (*dir_ / "data").string()},
        {"recipe", (src / "config/recipes" / recipe_).string()},
        {"instruments",
         json::array({{{"role", "source"}, {"name", "siggen"}, {"address", addr["source"]},
                       {"profile", (src / "config/instruments/sim-source.jsonc").string()}},
                      {{"role", "receiver"}, {"name", "analyzer"}, {"address", addr["receiver"]},
                       {"profile", (src / "config/instruments/sim-receiver.jsonc").string()}}})},
        {"api", {{"unix_socket", (*dir_ / "d.sock").string()}}}}
                                  .dump(2);
    if (!kit_.empty()) {
      json cfg = json::parse(std::ifstream(config_));
      cfg["calibration_kit"] = (src / "config/kits" / kit_).string();
      std::ofstream(config_) << cfg.dump(2);
    }
    daemon_ = std::make_unique<ChildProcess>(
        ChildProcess::start({daemon_binary().string(), "--config", config_, "--log-level", "warn"}, ChildProcess::Options{}));
    ASSERT_TRUE(daemon_->wait_for_line("listening", 30s).has_value()) << "echolined did not start";
  }

  void TearDown() override {
    if (daemon_) {
      EXPECT_EQ(daemon_->terminate(10s), 0);
    }
    if (sim_) sim_->terminate(5s);
  }

  struct Session {
    int code = -1000;
    std::string text;
    std::vector<std::string> lines;
  };

  // Runs the console fed `input` through a pipe until it exits.
  Session console(const std::string& input, std::vector<std::string> extra = {}) {
    std::vector<std::string> args = {client_binary().string(), "station", "--config", config_, "--sim-fixture", control_,
                                     "--lot", "TINY", "--operator", "ci"};
    args.insert(args.end(), extra.begin(), extra.end());
    return piped(args, input);
  }

  // The console started with `args` (no fixture unless they name one), fed `input`.
  static Session piped(const std::vector<std::string>& args, const std::string& input) {
    ChildProcess::Options o;
    o.pipe_stdin = true;
    o.merge_stderr = true;
    ChildProcess p = ChildProcess::start(args, o);
    p.write_stdin(input);
    p.close_stdin();
    Session s;
    while (auto line = p.read_line(60s)) {
      s.lines.push_back(*line);
      s.text += *line + "\n";
    }
    auto code = p.wait(30s);
    s.code = code ? *code : -999;
    return s;
  }

  // serial -> verdict from the console's "Unit <serial>   verdict <v>" lines.
  static std::map<std::string, std::string> verdicts(const Session& s) {
    std::map<std::string, std::string> out;
    static const std::regex re(R"(^\s+Unit (\S+)\s+verdict (\w+))");
    for (const auto& l : s.lines) {
      std::smatch m;
      if (std::regex_search(l, m, re)) out[m[1]] = m[2];
    }
    return out;
  }

  json truth(const std::string& serial) {
    auto c = client::LineConnection::connect_address(control_, client::Millis{3000});
    EXPECT_TRUE(c.ok());
    if (!c) return json::object();
    EXPECT_TRUE((*c)->write_line(json{{"cmd", "truth"}, {"unit", serial}}.dump()).ok());
    auto line = (*c)->read_line(client::Millis{5000});
    EXPECT_TRUE(line.ok());
    return line ? json::parse(*line) : json::object();
  }

  std::unique_ptr<TempDir> dir_;
  std::unique_ptr<ChildProcess> sim_, daemon_;
  std::string control_, config_;
  std::string recipe_ = "whip915.jsonc";
  std::string kit_;   // "" = the built-in kit
};

// The same bench (no switch) with the offset pair's recipe: the operator fits the line by hand.
class PairConsoleBench : public ConsoleBench {
 protected:
  PairConsoleBench() {
    recipe_ = "whip915-pair.jsonc";
    kit_ = "sim-kit.jsonc";   // the kit states the line
  }
};

TEST_F(ConsoleBench, PipedLotIsCalibratedJudgedAndSummarised) {
  std::string input = "\n\n\n";
  std::vector<std::string> serials;
  for (int i = 1; i <= 12; ++i) {
    serials.push_back(fmt::format("TINY-{:02d}", i));
    input += serials.back() + "\n";
  }
  const Session s = console(input);
  EXPECT_EQ(s.code, 0) << s.text;
  for (const char* standard : {"OPEN", "SHORT", "LOAD"}) {
    EXPECT_NE(s.text.find(fmt::format("Connect the {} standard to the test port, then press Enter", standard)),
              std::string::npos)
        << s.text;
  }
  EXPECT_NE(s.text.find(": VALID, minimum directivity"), std::string::npos) << s.text;
  EXPECT_NE(s.text.find("SAFETY"), std::string::npos);
  EXPECT_NE(s.text.find("RADIATES"), std::string::npos);
  EXPECT_EQ(s.text.find('\x1b'), std::string::npos) << "control codes on a pipe";

  const auto v = verdicts(s);
  ASSERT_EQ(v.size(), 12u) << s.text;
  std::map<std::string, int> counts;
  for (const auto& [serial, verdict] : v) ++counts[verdict];
  EXPECT_EQ(counts["aborted"], 0) << s.text;
  // The summary line matches the verdicts shown.
  const std::string summary = fmt::format("summary units=12 runs=12 pass={} fail={} inconclusive={} aborted=0",
                                          counts["pass"], counts["fail"], counts["inconclusive"]);
  EXPECT_NE(s.text.find(summary), std::string::npos) << summary << "\n" << s.text;

  // Ground truth: a broken feed reflects everything; such a unit must never pass, and every unit
  // whose true return loss clears 10 dB with margin over 902-928 MHz must not fail.
  int defects_checked = 0;
  for (const auto& serial : serials) {
    const json t = truth(serial);
    const std::string defect = t.value("defect", "");
    if (defect == "open-feed" || defect == "shorted-feed") {
      EXPECT_EQ(v.at(serial), "fail") << serial << " " << defect;
      ++defects_checked;
    }
  }
  EXPECT_EQ(defects_checked, 2) << "tiny-lot has one open-feed and one shorted-feed unit";
  // What to do with each unit is printed.
  EXPECT_NE(s.text.find(">>> Put it in the"), std::string::npos);
  // A plot with the limit line for judged units.
  EXPECT_NE(s.text.find("limit line (minimum return loss)"), std::string::npos) << s.text;
}

// After each unit's direct sweep the console asks for its second connection, through the kit's
// offset line; the simulator fixture fits it (as the operator would) and the unit is judged on
// both readings: none aborted, and the daemon's log of the run names no missing reading.
TEST_F(PairConsoleBench, TheSecondReadingThroughTheLineIsPromptedAndTaken) {
  const Session s = console("\n\n\nTINY-01\nTINY-02\n");
  EXPECT_EQ(s.code, 0) << s.text;
  for (const char* serial : {"TINY-01", "TINY-02"}) {
    EXPECT_NE(s.text.find(fmt::format(">>> SECOND READING of {}: fit the offset line to the test port", serial)),
              std::string::npos)
        << s.text;
  }
  const auto v = verdicts(s);
  ASSERT_EQ(v.size(), 2u) << s.text;
  for (const auto& [serial, verdict] : v) EXPECT_NE(verdict, "aborted") << serial << "\n" << s.text;
  EXPECT_EQ(s.text.find("could not connect"), std::string::npos) << s.text;
}

TEST_F(ConsoleBench, RetestQuestionIsAskedAndAnswered) {
  const Session s = console("\n\n\nTINY-01\nTINY-01\ny\nTINY-01\nn\n");
  EXPECT_EQ(s.code, 0) << s.text;
  EXPECT_NE(s.text.find("TINY-01 already tested 1 time — retest? [y/N] y"), std::string::npos) << s.text;
  EXPECT_NE(s.text.find("TINY-01 already tested 2 times — retest? [y/N] n"), std::string::npos) << s.text;
  EXPECT_NE(s.text.find("Not retested: TINY-01"), std::string::npos) << s.text;
  EXPECT_NE(s.text.find("summary units=1 runs=2"), std::string::npos) << s.text;
}

TEST_F(ConsoleBench, InvalidSerialIsShownPlainlyAndQuitEndsTheSession) {
  const Session s = console("\n\n\nbad serial!\nq\nTINY-01\n");
  EXPECT_EQ(s.code, 0) << s.text;
  EXPECT_NE(s.text.find("NOT A VALID SERIAL: \"bad serial!\""), std::string::npos) << s.text;
  EXPECT_EQ(s.text.find("Unit TINY-01"), std::string::npos) << "lines after q must not be tested\n" << s.text;
  EXPECT_NE(s.text.find("summary units=0 runs=0"), std::string::npos) << s.text;
}

TEST_F(ConsoleBench, WithoutTheFixtureAPipeMustConfirmEachStandard) {
  // No --sim-fixture: a serial where an Enter is expected cancels the calibration; nothing is tested.
  const Session s = piped({client_binary().string(), "station", "--config", config_}, "TINY-01\n");
  const std::string& text = s.text;
  EXPECT_EQ(s.code, 0) << text;
  EXPECT_NE(text.find("expected an empty line to confirm; cancelled"), std::string::npos) << text;
  EXPECT_NE(text.find("CALIBRATION NOT COMPLETED"), std::string::npos) << text;
  EXPECT_NE(text.find("Unit not tested: TINY-01"), std::string::npos) << text;
}

// The instruments gone (the simulator stopped): nothing can be calibrated, so the scanned unit is
// not tested, and the session ends with README's instrument-trouble exit code (4), not 0.
TEST_F(ConsoleBench, AUnitLeftUntestedByTheInstrumentsEndsWithExitFour) {
  sim_->terminate(5s);
  sim_.reset();
  const Session s = piped({client_binary().string(), "station", "--config", config_}, "TINY-01\n\n\n\n");
  const std::string& text = s.text;
  EXPECT_EQ(s.code, 4) << text;   // README "Exit codes": 4 instrument trouble
  EXPECT_NE(text.find("CALIBRATION NOT COMPLETED"), std::string::npos) << text;
  EXPECT_NE(text.find("Unit not tested: TINY-01 (instrument trouble)"), std::string::npos) << text;
  EXPECT_NE(text.find("NOT JUDGED because of instrument trouble: 1 unit (TINY-01)"), std::string::npos) << text;
  EXPECT_EQ(text.find("(cal.start)"), std::string::npos) << text;
}

// An instrument that stops answering in the middle of a unit (the analyzer's link dropped): the
// run is stored as aborted with a reason that says "instrument trouble" and names the instrument,
// and the session ends with README's instrument-trouble exit code (4), not 0.
TEST_F(ConsoleBench, AUnitAbortedByADroppedAnalyzerEndsWithExitFour) {
  const Session first = console("TINY-02\nq\n");   // calibrates, then one unit judged
  ASSERT_EQ(first.code, 0) << first.text;
  ASSERT_EQ(verdicts(first).count("TINY-02"), 1u) << first.text;
  auto c = client::LineConnection::connect_address(control_, client::Millis{3000});
  ASSERT_TRUE(c.ok());
  ASSERT_TRUE((*c)->write_line(json{{"cmd", "fault"}, {"role", "receiver"}, {"kind", "drop"}, {"probability", 1}}.dump()).ok());
  auto armed = (*c)->read_line(client::Millis{5000});
  ASSERT_TRUE(armed.ok());
  ASSERT_TRUE(json::parse(*armed)["ok"].get<bool>()) << *armed;

  const Session s = console("TINY-03\n");
  const std::string& text = s.text;
  EXPECT_EQ(verdicts(s)["TINY-03"], "aborted") << text;   // never a pass
  EXPECT_EQ(s.code, 4) << text;                           // README "Exit codes": 4 instrument trouble
  // The run's reason says so and names the instrument on the same line (the summary line below
  // says "instrument trouble: 1 unit" whatever the reason is, so it cannot stand in for this).
  EXPECT_TRUE(std::regex_search(text, std::regex("instrument trouble: [^\n]*analyzer \\("))) << text;
  EXPECT_NE(text.find("Instrument trouble: unit not judged, test it again."), std::string::npos) << text;
  EXPECT_NE(text.find("NOT JUDGED because of instrument trouble: 1 unit (TINY-03)"), std::string::npos) << text;
}

// Runs the console on a pseudo-terminal; returns everything it wrote.
std::string run_on_pty(const std::vector<std::string>& args, const std::string& input,
                       const std::map<std::string, std::string>& env) {
  int master = -1;
  const pid_t pid = ::forkpty(&master, nullptr, nullptr, nullptr);
  if (pid < 0) return "forkpty failed";
  if (pid == 0) {
    for (const auto& [k, v] : env) ::setenv(k.c_str(), v.c_str(), 1);
    if (!env.count("NO_COLOR")) ::unsetenv("NO_COLOR");
    std::vector<char*> argv;
    for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
    argv.push_back(nullptr);
    ::execv(argv[0], argv.data());
    ::_exit(127);
  }
  std::string out;
  (void)!::write(master, input.data(), input.size());
  const auto deadline = std::chrono::steady_clock::now() + 60s;
  while (std::chrono::steady_clock::now() < deadline) {
    pollfd p{master, POLLIN, 0};
    if (::poll(&p, 1, 200) > 0) {
      char buf[4096];
      const ssize_t n = ::read(master, buf, sizeof buf);
      if (n <= 0) break;   // EIO: the console exited
      out.append(buf, static_cast<std::size_t>(n));
    }
  }
  ::close(master);
  int status = 0;
  ::waitpid(pid, &status, 0);
  return out;
}

TEST_F(ConsoleBench, OnATerminalTheVerdictIsABigColouredBannerWithItsReason) {
  const std::vector<std::string> args = {client_binary().string(), "station", "--config", config_, "--sim-fixture",
                                         control_};
  const std::string screen = run_on_pty(args, "\n\n\nTINY-07\nq\n", {{"TERM", "xterm"}});
  EXPECT_NE(screen.find("Scan serial:"), std::string::npos) << screen;
  // The banner: a rule and rows of block letters, coloured (SGR) on a terminal.
  EXPECT_NE(screen.find("=========================="), std::string::npos) << screen;
  EXPECT_NE(screen.find("#   #"), std::string::npos) << screen;
  EXPECT_NE(screen.find("\x1b[1;"), std::string::npos) << "no colour on a terminal";
  EXPECT_NE(screen.find("Unit TINY-07"), std::string::npos) << screen;
  EXPECT_NE(screen.find("Why: "), std::string::npos) << screen;
  EXPECT_NE(screen.find(">>> "), std::string::npos) << screen;
  // Progress drawn in place.
  EXPECT_NE(screen.find("\r  measuring TINY-07 ["), std::string::npos) << screen;
}

TEST_F(ConsoleBench, NoColorIsRespectedOnATerminal) {
  const std::vector<std::string> args = {client_binary().string(), "station", "--config", config_, "--sim-fixture",
                                         control_};
  const std::string screen = run_on_pty(args, "\n\n\nTINY-07\nq\n", {{"TERM", "xterm"}, {"NO_COLOR", "1"}});
  EXPECT_NE(screen.find("Unit TINY-07"), std::string::npos) << screen;
  EXPECT_EQ(screen.find("\x1b["), std::string::npos) << "colour despite NO_COLOR";
}

// The console on a pseudo-terminal, driven step by step like a person with a barcode scanner
// that types each serial followed by Enter in one burst.
class PtyConsole {
 public:
  explicit PtyConsole(const std::vector<std::string>& args) {
    pid_ = ::forkpty(&master_, nullptr, nullptr, nullptr);
    if (pid_ == 0) {
      ::setenv("TERM", "xterm", 1);
      ::setenv("NO_COLOR", "1", 1);
      std::vector<char*> argv;
      for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
      argv.push_back(nullptr);
      ::execv(argv[0], argv.data());
      ::_exit(127);
    }
  }
  ~PtyConsole() {
    if (master_ >= 0) ::close(master_);
    if (pid_ > 0) {
      ::kill(pid_, SIGKILL);
      int status = 0;
      ::waitpid(pid_, &status, 0);
    }
  }
  PtyConsole(const PtyConsole&) = delete;
  PtyConsole& operator=(const PtyConsole&) = delete;

  void type(const std::string& text) { (void)!::write(master_, text.data(), text.size()); }
  // Reads until `needle` appears after offset `from` of the screen; false at EOF or after 60 s.
  bool wait_for(const std::string& needle, std::size_t from = 0) {
    const auto deadline = std::chrono::steady_clock::now() + 60s;
    while (screen_.find(needle, from) == std::string::npos) {
      if (std::chrono::steady_clock::now() > deadline) return false;
      pollfd p{master_, POLLIN, 0};
      if (::poll(&p, 1, 200) <= 0) continue;
      char buf[4096];
      const ssize_t n = ::read(master_, buf, sizeof buf);
      if (n <= 0) return false;   // EIO: the console exited
      screen_.append(buf, static_cast<std::size_t>(n));
    }
    return true;
  }
  // Reads until the console exits; its exit code.
  int finish() {
    while (wait_for("\x01never\x01")) {
    }
    int status = 0;
    ::waitpid(pid_, &status, 0);
    pid_ = -1;
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  }
  const std::string& screen() const { return screen_; }

 private:
  int master_ = -1;
  pid_t pid_ = -1;
  std::string screen_;
};

// Scan-ahead: a serial scanned while a calibration prompt or the retest question is open is
// never taken as the answer and never dropped; every scanned unit is tested, in scan order.
TEST_F(ConsoleBench, SerialsScannedAheadAtPromptsAreKeptAndTested) {
  PtyConsole pty({client_binary().string(), "station", "--config", config_, "--sim-fixture", control_, "--lot", "TINY"});
  ASSERT_TRUE(pty.wait_for("Connect the OPEN standard")) << pty.screen();
  pty.type("TINY-02\n");   // scanned while the calibration waits for Enter
  ASSERT_TRUE(pty.wait_for("(serial TINY-02 kept: it is tested next, 1 waiting)")) << pty.screen();
  pty.type("\n");
  for (const char* standard : {"SHORT", "LOAD"}) {
    ASSERT_TRUE(pty.wait_for(fmt::format("Connect the {} standard", standard))) << pty.screen();
    pty.type("\n");
  }
  ASSERT_TRUE(pty.wait_for("Unit TINY-02")) << "the kept serial is tested after the calibration\n" << pty.screen();

  // One burst: a unit, the same unit again, and the next unit before the question is answered.
  ASSERT_TRUE(pty.wait_for("Scan serial:", pty.screen().find("Unit TINY-02"))) << pty.screen();
  pty.type("TINY-01\nTINY-01\nTINY-03\n");
  ASSERT_TRUE(pty.wait_for("(serial TINY-03 kept: it is tested next, 1 waiting)")) << pty.screen();
  const std::size_t asked_again = pty.screen().find("(serial TINY-03 kept");
  ASSERT_TRUE(pty.wait_for("TINY-01 already tested 1 time — retest? [y/N]", asked_again)) << "question stays open\n"
                                                                                      << pty.screen();
  pty.type("TINY-04\n");   // scanned while the question is visibly open
  ASSERT_TRUE(pty.wait_for("(serial TINY-04 kept: it is tested next, 2 waiting)")) << pty.screen();
  pty.type("\n");          // Enter: no retest
  ASSERT_TRUE(pty.wait_for("Not retested: TINY-01")) << pty.screen();
  ASSERT_TRUE(pty.wait_for("Unit TINY-04")) << pty.screen();
  pty.type("q\n");
  EXPECT_EQ(pty.finish(), 0) << pty.screen();
  const std::string& screen = pty.screen();
  // Every scanned unit judged once, kept serials in scan order.
  const auto at = [&](const std::string& unit) { return screen.find("Unit " + unit + "   verdict"); };
  for (const char* unit : {"TINY-01", "TINY-02", "TINY-03", "TINY-04"})
    EXPECT_NE(at(unit), std::string::npos) << unit << "\n" << screen;
  EXPECT_LT(at("TINY-03"), at("TINY-04")) << screen;
  EXPECT_NE(screen.find("summary units=4 runs=4"), std::string::npos) << screen;
}

}  // namespace
}  // namespace echoline::testing
