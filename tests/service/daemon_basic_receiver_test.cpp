// A receiver without VBW, reference level or attenuator (config/instruments/sim-basic-receiver.jsonc
// declares them absent): echolined on a real echoline-sim tests a unit with a recipe that needs
// none of them, and refuses recipes that need one, naming the operation and the profile.
#include <fstream>
#include <iterator>

#include <gtest/gtest.h>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

std::string read_text(const std::filesystem::path& p) {
  std::ifstream in(p);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

// whip915.jsonc without the three receiver keys a basic receiver cannot honour.
std::filesystem::path write_basic_recipe(const std::filesystem::path& dir) {
  std::string text = read_text(testing::source_dir() / "config/recipes/whip915.jsonc");
  for (const std::string key : {"\"vbw_hz\"", "\"reference_level_dbm\"", "\"attenuation_db\""}) {
    const auto at = text.find(key);
    if (at == std::string::npos) throw std::runtime_error("whip915.jsonc has no " + key);
    const auto line_start = text.rfind('\n', at) + 1;
    text.erase(line_start, text.find('\n', at) + 1 - line_start);
  }
  const auto file = dir / "whip915-basic.jsonc";
  std::ofstream(file) << text;
  return file;
}

// The e2e station with its receiver described by the basic profile and `recipe` loaded.
std::filesystem::path write_basic_station(const std::filesystem::path& dir, const Sim& sim, const std::filesystem::path& recipe) {
  const auto file = write_station_config(dir, sim);
  json cfg = json::parse(read_text(file));
  for (auto& inst : cfg["instruments"])
    if (inst["role"] == "receiver")
      inst["profile"] = (testing::source_dir() / "config/instruments/sim-basic-receiver.jsonc").string();
  cfg["recipe"] = recipe.string();
  std::ofstream(file) << cfg.dump(2) << "\n";
  return file;
}

TEST(BasicReceiver, RecipeThatNeedsNoneOfTheAbsentOperationsRunsAndOneThatDoesIsRefused) {
  testing::TempDir dir{"echoline-basic-rx"};
  Sim sim("tiny-lot.jsonc");
  const auto config = write_basic_station(dir.path(), sim, write_basic_recipe(dir.path()));
  Daemon daemon(config);
  Api api = Api::connect(daemon);

  // End to end: calibrate, then test a unit to a verdict.
  json cal = calibrate(api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  const std::string serial = sim.units().front();
  json run = test_unit(api, sim, serial);
  EXPECT_EQ(run["serial"], serial) << run.dump();
  const std::string verdict = run["verdict"];
  EXPECT_TRUE(verdict == "pass" || verdict == "fail" || verdict == "inconclusive") << run.dump();
  EXPECT_EQ(run["points_count"].get<int>(), 221) << run.dump();   // whip915: 860-970 MHz in 0.5 MHz steps

  // The shipped whip915 sets VBW, reference level and attenuation: refused, naming each.
  ASSERT_TRUE(api.call("hello", {{"role", "engineer"}})["ok"].get<bool>());
  json r = api.call("recipe.select", {{"path", (testing::source_dir() / "config/recipes/whip915.jsonc").string()}});
  ASSERT_FALSE(r["ok"].get<bool>()) << r.dump();
  const std::string message = r["error"]["message"];
  EXPECT_NE(message.find("needs the receiver operation set_vbw, which profile sim-basic-receiver declares absent"),
            std::string::npos) << message;
  json s = api.call("status");
  EXPECT_EQ(s["result"]["recipe"]["path"], (dir.path() / "whip915-basic.jsonc").string()) << "the basic recipe stays: " << s.dump();
}

TEST(BasicReceiver, DaemonRefusesToStartWithARecipeThatNeedsAnAbsentOperation) {
  testing::TempDir dir{"echoline-basic-rx"};
  Sim sim("tiny-lot.jsonc");
  const auto config = write_basic_station(dir.path(), sim, testing::source_dir() / "config/recipes/whip915.jsonc");
  testing::ChildProcess::Options opts;
  opts.merge_stderr = true;
  auto proc = testing::ChildProcess::start({testing::daemon_binary().string(), "--config", config.string()}, opts);
  std::string err;
  while (auto line = proc.read_line(30s)) err += *line + "\n";
  const auto code = proc.wait(10s);
  ASSERT_TRUE(code.has_value());
  EXPECT_EQ(*code, 2) << "a recipe the station cannot run is a configuration error (README, Exit codes)";
  for (const char* op : {"set_vbw", "set_reference_level", "set_attenuation"}) {
    EXPECT_NE(err.find(op), std::string::npos) << op << " not named in:\n" << err;
  }
  EXPECT_NE(err.find("sim-basic-receiver"), std::string::npos) << err;
}

}  // namespace
}  // namespace echoline::e2e
