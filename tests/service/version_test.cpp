// One version everywhere: `--version` of echolined, echoline and echoline-sim, and the daemon's
// hello and status, all name the release number and commit this build was made from
// (echoline/version.hpp, generated from CMake's project version and git).
#include <regex>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "echoline/version.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

struct Printed {
  int code = -1000;
  std::vector<std::string> lines;   // stdout and stderr together
};

Printed run_binary(const std::filesystem::path& binary, std::vector<std::string> args) {
  args.insert(args.begin(), binary.string());
  testing::ChildProcess::Options o;
  o.merge_stderr = true;
  auto p = testing::ChildProcess::start(args, o);
  Printed out;
  while (auto line = p.read_line(20s)) out.lines.push_back(*line);
  out.code = p.wait(20s).value_or(-999);
  return out;
}

TEST(Version, EveryBinaryPrintsOneLineWithTheSameVersionAndCommit) {
  const std::vector<std::pair<std::string, std::filesystem::path>> binaries = {
      {"echolined", testing::daemon_binary()}, {"echoline", testing::client_binary()}, {"echoline-sim", testing::sim_binary()}};
  // "<program> 1.2.3 (g1234abc)", "(g1234abc-dirty)" or "(unknown)" outside git.
  const std::regex shape(R"(^(\S+) (\d+\.\d+\.\d+) \((g[0-9a-f]{7,}(-dirty)?|unknown)\)$)");
  std::string first_tail;
  for (const auto& [name, binary] : binaries) {
    const Printed p = run_binary(binary, {"--version"});
    EXPECT_EQ(p.code, 0) << name;
    ASSERT_EQ(p.lines.size(), 1u) << name;
    std::smatch m;
    ASSERT_TRUE(std::regex_match(p.lines[0], m, shape)) << p.lines[0];
    EXPECT_EQ(m[1].str(), name);
    EXPECT_EQ(p.lines[0], version_line(name));
    const std::string tail = p.lines[0].substr(name.size());
    if (first_tail.empty()) first_tail = tail;
    EXPECT_EQ(tail, first_tail) << name << " disagrees with " << binaries.front().first;
  }
  EXPECT_EQ(std::string(version()), ECHOLINE_VERSION);
}

TEST(Version, VersionNeedsNoConfigAndWinsOverOtherOptions) {
  // --version answers before anything is loaded: a missing config does not matter.
  const Printed daemon = run_binary(testing::daemon_binary(), {"--config", "/nonexistent/station.jsonc", "--version"});
  EXPECT_EQ(daemon.code, 0);
  ASSERT_FALSE(daemon.lines.empty());
  EXPECT_EQ(daemon.lines.back(), version_line("echolined"));
  const Printed sim = run_binary(testing::sim_binary(), {"--version"});
  EXPECT_EQ(sim.code, 0);
}

TEST(Version, HelloAndStatusCarryTheBuildsVersion) {
  testing::TempDir dir("echoline-version");
  Sim sim("tiny-lot.jsonc");
  Daemon daemon(write_station_config(dir.path(), sim));
  Api api = Api::connect(daemon);
  json h = api.call("hello", {{"role", "operator"}});
  ASSERT_TRUE(h["ok"].get<bool>()) << h.dump();
  EXPECT_EQ(h["result"]["daemon"], version_line("echolined"));
  json s = api.call("status");
  ASSERT_TRUE(s["ok"].get<bool>()) << s.dump();
  EXPECT_EQ(s["result"]["version"], std::string(version()));
  EXPECT_EQ(s["result"]["commit"], std::string(commit()));
}

}  // namespace
}  // namespace echoline::e2e
