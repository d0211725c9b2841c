// scripts/demo: help and usage errors are answered before anything is built or started, and a
// short run on the simulator builds only the three programs it runs (a stand-in cmake on PATH
// records what the demo asks to build; the programs are this build's own).
#include <sys/stat.h>

#include <gtest/gtest.h>

#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>

#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

struct Outcome {
  int code = -1000;
  std::string output;
};

Outcome run_demo(std::vector<std::string> args, std::map<std::string, std::string> env = {}) {
  args.insert(args.begin(), (source_dir() / "scripts/demo").string());
  ChildProcess::Options o;
  o.merge_stderr = true;
  o.env = std::move(env);
  ChildProcess p = ChildProcess::start(args, o);
  Outcome out;
  while (auto line = p.read_line(60s)) out.output += *line + "\n";
  out.code = p.wait(60s).value_or(-999);
  return out;
}

TEST(DemoScript, HelpExitsZeroAndNamesTheOptions) {
  const Outcome o = run_demo({"--help"});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("usage: scripts/demo"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("--interactive"), std::string::npos) << o.output;
}

TEST(DemoScript, UsageErrorsExitTwoBeforeBuilding) {
  const Outcome bad = run_demo({"--frobnicate"});
  EXPECT_EQ(bad.code, 2) << bad.output;
  EXPECT_NE(bad.output.find("unknown option '--frobnicate'"), std::string::npos) << bad.output;
  const Outcome zero = run_demo({"--units", "0"});
  EXPECT_EQ(zero.code, 2) << zero.output;
  const Outcome many = run_demo({"--units", "241"});
  EXPECT_EQ(many.code, 2) << many.output;
  const Outcome word = run_demo({"--units", "lots"});
  EXPECT_EQ(word.code, 2) << word.output;
}

TEST(DemoScript, BuildsOnlyTheThreeProgramsItRunsThenRunsTheJob) {
  TempDir dir("echoline-demo");
  // A cmake that records its arguments and builds nothing.
  std::filesystem::create_directories(dir / "bin");
  const auto log = dir / "cmake.log";
  const auto fake = dir / "bin/cmake";
  std::ofstream(fake) << "#!/bin/sh\nprintf '%s\\n' \"$*\" >> '" << log.string() << "'\n";
  ::chmod(fake.c_str(), 0755);
  const std::string path = (dir / "bin").string() + ":" + (std::getenv("PATH") ? std::getenv("PATH") : "/usr/bin:/bin");
  const auto build = daemon_binary().parent_path().parent_path();   // <build>/daemon/echolined

  const Outcome o = run_demo({"--units", "3", "--out", (dir / "out").string()},
                             {{"PATH", path}, {"ECHOLINE_BUILD_DIR", build.string()}});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_NE(o.output.find("Yield of lot whip915-lot-a:"), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("Lot report:"), std::string::npos) << o.output;
  // How many units were inconclusive, and how many of them a retest cannot settle.
  EXPECT_NE(o.output.find("Inconclusive: "), std::string::npos) << o.output;
  EXPECT_NE(o.output.find("a retest on this bench cannot settle"), std::string::npos) << o.output;

  std::ifstream in(log);
  std::string line;
  int builds = 0;
  while (std::getline(in, line)) {
    if (line.find("--build") == std::string::npos) continue;   // the configure step
    ++builds;
    // "--target a b c ...": the names up to the next option.
    const auto at = line.find("--target ");
    ASSERT_NE(at, std::string::npos) << "a build of everything: " << line;
    std::istringstream listed(line.substr(at + 9));
    std::vector<std::string> names;
    for (std::string w; listed >> w && w.rfind("-", 0) != 0;) names.push_back(w);
    EXPECT_EQ(names, (std::vector<std::string>{"echolined", "echoline", "echoline-sim"})) << line;
  }
  EXPECT_EQ(builds, 1) << "the demo should build once";
}

}  // namespace
}  // namespace echoline::testing
