// `--json` on `echoline status`, `runs` and `cal`: one JSON object on stdout that a program can
// parse (RFC 8259, read here with nlohmann::json), with the documented exit codes.
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

struct Outcome {
  int code = -1000;
  std::string out;   // stdout only: it must be JSON alone
};

Outcome client(std::vector<std::string> args) {
  args.insert(args.begin(), testing::client_binary().string());
  auto p = testing::ChildProcess::start(args);   // stderr inherited: not mixed into the JSON
  Outcome o;
  while (auto line = p.read_line(30s)) o.out += *line + "\n";
  o.code = p.wait(30s).value_or(-999);
  return o;
}

json parsed(const Outcome& o) {
  try {
    return json::parse(o.out);
  } catch (const json::parse_error& e) {
    ADD_FAILURE() << "not JSON: " << e.what() << "\n" << o.out;
    return json::object();
  }
}

TEST(ClientJson, StatusRunsAndCalPrintOneParsableObject) {
  testing::TempDir dir("echoline-client-json");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  Daemon daemon(config);
  Api api = Api::connect(daemon);
  ASSERT_EQ(calibrate(api, sim)["event"], "result");
  (void)test_unit(api, sim, "TINY-01", "LOT-J");
  (void)test_unit(api, sim, "TINY-02", "LOT-J");
  const std::vector<std::string> socket = {"--socket", daemon.unix_path()};
  const auto with = [&](std::vector<std::string> a) {
    a.insert(a.end(), socket.begin(), socket.end());
    return a;
  };

  const Outcome status = client(with({"status", "--json"}));
  EXPECT_EQ(status.code, 0) << status.out;
  const json s = parsed(status);
  EXPECT_EQ(s["station"], "e2e-bench");
  EXPECT_TRUE(s["ready"].get<bool>());
  EXPECT_EQ(s["instruments"].size(), 2u);

  const Outcome lot = client(with({"runs", "--lot", "LOT-J", "--json"}));
  EXPECT_EQ(lot.code, 0) << lot.out;
  const json l = parsed(lot);
  EXPECT_EQ(l["lot"], "LOT-J");
  ASSERT_EQ(l["runs"].size(), 2u);
  EXPECT_EQ(l["runs"][0]["serial"], "TINY-01");
  EXPECT_EQ(l["yield"]["units"], 2);
  EXPECT_EQ(l["yield"]["judged"], 2);
  int passed = 0;
  for (const auto& r : l["runs"]) passed += r["verdict"] == "pass";
  EXPECT_EQ(l["yield"]["passed"], passed);
  EXPECT_DOUBLE_EQ(l["yield"]["yield"].get<double>(), passed / 2.0);

  const Outcome none = client(with({"runs", "--serial", "NO-SUCH-UNIT", "--json"}));
  EXPECT_EQ(none.code, 1) << none.out;   // documented: 1 nothing stored under that key
  EXPECT_TRUE(parsed(none)["runs"].empty());

  const Outcome cal = client(with({"cal", "status", "--json"}));
  EXPECT_EQ(cal.code, 0) << cal.out;
  const json c = parsed(cal);
  EXPECT_TRUE(c["present"].get<bool>()) << c.dump();
  EXPECT_TRUE(c["valid"].get<bool>()) << c.dump();

  const auto store = dir.path() / "data" / "e2e-bench.sqlite";
  const Outcome history = client({"cal", "history", "--json", "--store", store.string()});
  EXPECT_EQ(history.code, 0) << history.out;
  const json h = parsed(history);
  ASSERT_EQ(h["calibrations"].size(), 1u) << h.dump();
  EXPECT_EQ(h["calibrations"][0]["id"], c["id"]);
  EXPECT_EQ(h["calibrations"][0]["runs"], 2);
}

}  // namespace
}  // namespace echoline::e2e
