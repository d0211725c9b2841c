// scripts/demo's command line: help and usage errors are answered before anything is built or
// started (the full demo is exercised by running it; see README "Quick start").
#include <gtest/gtest.h>

#include <string>

#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

struct Outcome {
  int code = -1000;
  std::string output;
};

Outcome run_demo(std::vector<std::string> args) {
  args.insert(args.begin(), (source_dir() / "scripts/demo").string());
  ChildProcess::Options o;
  o.merge_stderr = true;
  ChildProcess p = ChildProcess::start(args, o);
  Outcome out;
  while (auto line = p.read_line(10s)) out.output += *line + "\n";
  out.code = p.wait(10s).value_or(-999);
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

}  // namespace
}  // namespace echoline::testing
