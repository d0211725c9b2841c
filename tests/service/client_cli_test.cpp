// The `echoline` binary as a user meets it: --help everywhere, usage errors, offline recipe
// check with file:line findings, and a clear message when the daemon is not there.
#include <gtest/gtest.h>

#include <fstream>
#include <string>
#include <vector>

#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

struct Outcome {
  int code = -1000;
  std::string output;   // stdout and stderr together
};

Outcome run_client(std::vector<std::string> args, std::map<std::string, std::string> env = {}) {
  args.insert(args.begin(), client_binary().string());
  ChildProcess::Options o;
  o.merge_stderr = true;
  o.cwd = source_dir();
  o.env = std::move(env);
  ChildProcess p = ChildProcess::start(args, o);
  Outcome out;
  while (auto line = p.read_line(20s)) out.output += *line + "\n";
  auto code = p.wait(20s);
  out.code = code ? *code : -999;
  return out;
}

TEST(ClientCli, HelpOnTheProgramAndEverySubcommandExitsZero) {
  const Outcome top = run_client({"--help"});
  EXPECT_EQ(top.code, 0) << top.output;
  EXPECT_NE(top.output.find("exit codes"), std::string::npos);
  for (const auto& sub : std::vector<std::vector<std::string>>{{"station", "--help"}, {"recipe", "--help"},
                                                               {"dry-run", "--help"}, {"runs", "--help"},
                                                               {"report", "--help"}, {"export", "--help"},
                                                               {"cal", "--help"},     {"status", "--help"},
                                                               {"rejudge", "--help"}}) {
    const Outcome o = run_client(sub);
    EXPECT_EQ(o.code, 0) << sub[0] << ": " << o.output;
    EXPECT_NE(o.output.find("usage: echoline " + sub[0]), std::string::npos) << o.output;
  }
}

// The top-level help names every export format, Touchstone s1p among them.
TEST(ClientCli, TopLevelHelpNamesTheS1pExport) {
  const Outcome top = run_client({"--help"});
  EXPECT_EQ(top.code, 0) << top.output;
  EXPECT_NE(top.output.find("Touchstone s1p"), std::string::npos) << top.output;
}

// recipe check without any station config: the message names the option its help documents
// (--station) and the paths it looked at.
TEST(ClientCli, RecipeCheckWithoutAStationNamesStationOptionAndPathsTried) {
  TempDir dir;   // no config/station.jsonc under it
  ChildProcess::Options o;
  o.merge_stderr = true;
  o.cwd = dir.path();
  o.env = {{"ECHOLINE_CONFIG", ""}};
  ChildProcess p = ChildProcess::start(
      {client_binary().string(), "recipe", "check", (source_dir() / "config/recipes/whip915.jsonc").string()}, o);
  std::string output;
  while (auto line = p.read_line(20s)) output += *line + "\n";
  EXPECT_EQ(p.wait(20s), std::optional<int>(2)) << output;
  EXPECT_NE(output.find("give --station CONFIG"), std::string::npos) << output;
  EXPECT_EQ(output.find("--config"), std::string::npos) << output;
  EXPECT_NE(output.find((dir.path() / "config/station.jsonc").string()), std::string::npos) << output;
}

TEST(ClientCli, BadUsageExitsTwoAndSaysWhatIsWrong) {
  const Outcome none = run_client({});
  EXPECT_EQ(none.code, 2);
  const Outcome unknown = run_client({"frobnicate"});
  EXPECT_EQ(unknown.code, 2);
  EXPECT_NE(unknown.output.find("unknown command \"frobnicate\""), std::string::npos) << unknown.output;
  const Outcome option = run_client({"runs", "--lot", "L", "--bogus"});
  EXPECT_EQ(option.code, 2);
  EXPECT_NE(option.output.find("--bogus"), std::string::npos) << option.output;
  const Outcome both = run_client({"runs"});
  EXPECT_EQ(both.code, 2);
  EXPECT_NE(both.output.find("--serial"), std::string::npos) << both.output;
  const Outcome scope = run_client({"export", "--scope", "everything", "--key", "k", "--format", "csv", "--out", "x"});
  EXPECT_EQ(scope.code, 2) << scope.output;
}

TEST(ClientCli, ShippedRecipesPassTheCheckOnTheShippedStation) {
  const Outcome o = run_client({"recipe", "check", "config/recipes/whip915.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("0 errors"), std::string::npos) << o.output;
}

// A recipe asking for the kit's mismatch standards passes on the shipped station (its kit has
// them) and is refused on a station whose kit has none, naming the recipe key and the kit file.
TEST(ClientCli, MismatchRecipeNeedsAKitWithMismatchStandards) {
  const Outcome ok = run_client({"recipe", "check", "config/recipes/whip915-mm.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(ok.code, 0) << ok.output;
  const Outcome window = run_client({"recipe", "check", "config/recipes/whip915-window-mm.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(window.code, 0) << window.output;
  TempDir dir;
  std::ifstream in(source_dir() / "config/station.jsonc");
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string config = (source_dir() / "config").string() + "/";
  for (const std::string from : {"\"recipes/", "\"instruments/"}) {
    for (auto at = text.find(from); at != std::string::npos; at = text.find(from, at + 1)) text.insert(at + 1, config);
  }
  const std::string kit = "\"kits/sim-kit.jsonc\"";
  const auto at = text.find(kit);
  ASSERT_NE(at, std::string::npos);
  const std::string generic = config + "kits/generic-conservative.jsonc";
  text.replace(at, kit.size(), "\"" + generic + "\"");
  std::ofstream(dir / "station.jsonc") << text;
  const Outcome o = run_client({"recipe", "check", "config/recipes/whip915-mm.jsonc", "--station", (dir / "station.jsonc").string()});
  EXPECT_EQ(o.code, 1) << o.output;
  EXPECT_NE(o.output.find("/calibration/use_mismatch"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find(generic), std::string::npos) << o.output;
  const Outcome plain = run_client({"recipe", "check", "config/recipes/whip915.jsonc", "--station", (dir / "station.jsonc").string()});
  EXPECT_EQ(plain.code, 0) << plain.output;   // the same station runs the plain recipe
}

TEST(ClientCli, RecipeBeyondTheSourceExitsOneWithFileLineAndKey) {
  TempDir dir;
  const auto file = dir / "hot.jsonc";
  std::ifstream in(source_dir() / "config/recipes/whip915.jsonc");
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string from = "\"power_dbm\": -10";
  const auto at = text.find(from);
  ASSERT_NE(at, std::string::npos);
  // +25 dBm: above the sim source's +20 dBm maximum (config/instruments/sim-source.jsonc).
  text.replace(at, from.size(), "\"power_dbm\": 25");
  std::ofstream(file) << text;
  int line = 1;
  for (std::size_t i = 0; i < at; ++i) line += text[i] == '\n';
  const Outcome o = run_client({"recipe", "check", file.string(), "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 1) << o.output;
  EXPECT_NE(o.output.find(file.string() + ":" + std::to_string(line) + ": /source/power_dbm:"), std::string::npos)
      << o.output;
}

TEST(ClientCli, RecipeThatDoesNotParseExitsOneWithFileLine) {
  TempDir dir;
  const auto file = dir / "broken.jsonc";
  std::ofstream(file) << "{\n  \"name\": \"x\",\n  \"version\": \"1\",\n  \"segments\": [ oops ]\n}\n";
  const Outcome o = run_client({"recipe", "check", file.string(), "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 1) << o.output;
  EXPECT_NE(o.output.find(file.string() + ":4"), std::string::npos) << o.output;
}

TEST(ClientCli, DryRunPrintsThePlanWithoutADaemon) {
  const Outcome o = run_client({"dry-run", "config/recipes/whip915.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 0) << o.output;
  // whip915: 860-970 MHz in 221 points (config/recipes/whip915.jsonc).
  EXPECT_NE(o.output.find("221 frequencies"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("worst-case power at the receiver"), std::string::npos) << o.output;
  // The mask's guard band on this station and the predicted shares (mask_prediction.hpp).
  EXPECT_NE(o.output.find("mask 902\u2013928 MHz \u2265 10.0 dB: passes when the reading is at least"), std::string::npos)
      << o.output;
  EXPECT_NE(o.output.find("inconclusive ("), std::string::npos) << o.output;
}

// The offset pair on the shipped station (its switch has the DUT-OFFSET arm, its kit the line):
// two sweeps a unit, the kit's line in words, and the mask's thresholds on the pair's estimate.
TEST(ClientCli, DryRunOfTheOffsetPairNamesTheLineAndTheSecondSweep) {
  const Outcome o = run_client({"dry-run", "config/recipes/whip915-pair.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("two sweeps with the offset pair"), std::string::npos) << o.output;
  // config/kits/sim-kit.jsonc: 273.2 ± 2 ps, 0.08 ± 0.04 dB, 39 dB.
  EXPECT_NE(o.output.find("DUT-OFFSET arm, through the kit's line (273.2 ± 2.0 ps, 0.08 ± 0.04 dB, match 39.0 dB)"),
            std::string::npos)
      << o.output;
  EXPECT_NE(o.output.find("passes when the offset pair's return loss is at least"), std::string::npos) << o.output;
}

// The same on a station without the switch: the recipe is accepted, the operator fits the line
// when prompted, and the line's connection, made anew for every unit, joins its match (sim-kit:
// 39 dB is 0.011220; + 3 × 0.001 (60 dB repeatability at k = 3) = 0.014220, 36.9 dB; the
// definition of return loss, 20·log10).
TEST(ClientCli, TheOffsetPairWithoutASwitchIsFittedByHand) {
  TempDir dir;
  std::ifstream in(source_dir() / "config/station.jsonc");
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string config = (source_dir() / "config").string() + "/";
  for (const std::string from : {"\"recipes/", "\"instruments/", "\"kits/"}) {
    for (auto at = text.find(from); at != std::string::npos; at = text.find(from, at + 1)) text.insert(at + 1, config);
  }
  const auto sw = text.find("{ \"role\": \"switch\"");
  ASSERT_NE(sw, std::string::npos);
  const auto before = text.rfind(',', sw);
  text.erase(before, text.find('}', sw) + 1 - before);
  std::ofstream(dir / "station.jsonc") << text;
  const std::string station = (dir / "station.jsonc").string();
  const Outcome check = run_client({"recipe", "check", "config/recipes/whip915-pair.jsonc", "--station", station});
  EXPECT_EQ(check.code, 0) << check.output;
  EXPECT_NE(check.output.find("fitted by hand for each unit"), std::string::npos) << check.output;
  EXPECT_NE(check.output.find("39.0 dB becomes 36.9 dB"), std::string::npos) << check.output;
  const Outcome dry = run_client({"dry-run", "config/recipes/whip915-pair.jsonc", "--station", station});
  EXPECT_EQ(dry.code, 0) << dry.output;
  EXPECT_NE(dry.output.find("with the line fitted by the operator when prompted"), std::string::npos) << dry.output;
  EXPECT_NE(dry.output.find("match 36.9 dB with its connection made anew each time"), std::string::npos) << dry.output;
}

// A fast-capture recipe: the plan the station chooses on the simulator's profiles, why, and the
// expected time. 1 MHz RBW: the LOAD at 0 - 20 - 0.5 - 0.6 - 30 = -51.1 dBm must stay 35 dB over
// kTB + NF 24 dB (-174 + 60 + 24 = -90 dBm at 1 MHz, 38.9 dB under; 3 MHz gives only 34.1 dB).
TEST(ClientCli, DryRunShowsTheFastCapturePlanAndWhy) {
  const Outcome o = run_client({"dry-run", "config/recipes/whip915-fast.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("fast capture plan: source ramps under one receiver sweep"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("receiver RBW 1 MHz, 223 bins"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("why: "), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("38.9 dB under the LOAD"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("expected capture 0.224 s per unit"), std::string::npos) << o.output;
}

// The shipped station config has no start-pulse cable: recipe check says that the capture runs
// free and what a cable would change (README, "Fast capture"), though it is no finding.
TEST(ClientCli, RecipeCheckSaysAFastCaptureRunsFree) {
  const Outcome o = run_client({"recipe", "check", "config/recipes/whip915-fast.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("ramp phase left to chance"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("fixture.start_pulse_cable"), std::string::npos) << o.output;
  const Outcome step = run_client({"recipe", "check", "config/recipes/whip915.jsonc", "--station", "config/station.jsonc"});
  EXPECT_EQ(step.output.find("ramp phase"), std::string::npos) << step.output;
}

// A serial no station accepts (a space: serial.hpp's fixed rules) is a usage error naming the
// character, not "no runs stored": the operator typed it wrong.
TEST(ClientCli, RunsForASerialNoStationAcceptsIsAUsageError) {
  const Outcome o = run_client({"runs", "--serial", "bad serial!", "--store", "/nonexistent/store.sqlite"});
  EXPECT_EQ(o.code, 2) << o.output;
  EXPECT_NE(o.output.find("space at position 4"), std::string::npos) << o.output;
}

TEST(ClientCli, DaemonUnreachableExitsThreeWithAClearMessage) {
  TempDir dir;
  const std::string sock = (dir / "nobody.sock").string();
  for (const auto& args : std::vector<std::vector<std::string>>{{"status", "--socket", sock},
                                                                {"station", "--socket", sock},
                                                                {"runs", "--lot", "L", "--socket", sock},
                                                                {"cal", "status", "--socket", sock}}) {
    const Outcome o = run_client(args);
    EXPECT_EQ(o.code, 3) << args[0] << ": " << o.output;
    EXPECT_NE(o.output.find("cannot reach the daemon"), std::string::npos) << o.output;
    EXPECT_NE(o.output.find(sock), std::string::npos) << o.output;
  }
  const Outcome tcp = run_client({"status", "--tcp", "127.0.0.1:1"});
  EXPECT_EQ(tcp.code, 3) << tcp.output;
}

TEST(ClientCli, OfflineCommandsOnAMissingStoreAreStorageErrors) {
  TempDir dir;
  const Outcome o = run_client({"runs", "--lot", "L", "--store", (dir / "none.sqlite").string()});
  EXPECT_EQ(o.code, 5) << o.output;
  EXPECT_NE(o.output.find("no such store file"), std::string::npos) << o.output;
}

}  // namespace
}  // namespace echoline::testing
