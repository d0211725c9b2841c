// Station configuration: the shipped file loads, relative paths resolve against the file's
// folder, and mistakes are named with file, line and key.
#include "drivers/station_config.hpp"

#include <fstream>

#include <gtest/gtest.h>

#include "tests/support/process.hpp"

namespace echoline::drivers {
namespace {

// A station file in a temp folder whose profiles point at the shipped sim profiles.
std::string station_text(const std::string& extra_instrument = "", const std::string& api = "") {
  const std::string prof = (testing::source_dir() / "config" / "instruments").string();
  return "{\n"
         "  \"station\": \"t\",\n"
         "  \"data_dir\": \"data\",\n"
         "  \"instruments\": [\n"
         "    {\"role\": \"source\", \"name\": \"gen\", \"address\": \"tcp://127.0.0.1:1\", \"profile\": \"" + prof + "/sim-source.jsonc\"},\n"
         "    {\"role\": \"receiver\", \"name\": \"sa\", \"address\": \"serial:/dev/ttyUSB0?baud=9600\", \"profile\": \"" + prof + "/sim-receiver.jsonc\"}" +
         extra_instrument + "\n"
         "  ]" + api + "\n"
         "}\n";
}

std::filesystem::path write(const testing::TempDir& dir, const std::string& text) {
  auto p = dir / "station.jsonc";
  std::ofstream(p) << text;
  return p;
}

ConfigError load_error(const std::filesystem::path& p) {
  try {
    load_station_config(p);
  } catch (const ConfigError& e) {
    return e;
  }
  ADD_FAILURE() << "no ConfigError";
  return ConfigError("", 0, "", "");
}

TEST(StationConfig, ShippedDemoStationLoads) {
  auto file = testing::source_dir() / "config" / "station.jsonc";
  StationConfig c = load_station_config(file);
  EXPECT_EQ(c.station, "line2-bench1");
  ASSERT_NE(c.find_role("source"), nullptr);
  ASSERT_NE(c.find_role("receiver"), nullptr);
  ASSERT_NE(c.find_role("switch"), nullptr);
  auto config_dir = std::filesystem::absolute(file).parent_path().lexically_normal();
  EXPECT_EQ(c.find_role("receiver")->profile, config_dir / "instruments" / "sim-receiver.jsonc");
  EXPECT_TRUE(c.data_dir.is_absolute());
  EXPECT_EQ(c.api.tcp_host, "127.0.0.1");
  EXPECT_EQ(c.api.tcp_port, 0);
  EXPECT_EQ(c.serial_pattern, "^[A-Za-z0-9._-]{1,64}$");
}

TEST(StationConfig, DefaultsAndRelativePaths) {
  testing::TempDir dir;
  StationConfig c = load_station_config(write(dir, station_text()));
  EXPECT_EQ(c.data_dir, (dir.path() / "data").lexically_normal());
  EXPECT_EQ(c.log_dir, c.data_dir / "log");
  EXPECT_EQ(c.api.unix_socket, c.data_dir / "echolined.sock");
  EXPECT_TRUE(c.recipe.empty());
  EXPECT_DOUBLE_EQ(c.fixture.coupling_db, 20);
  EXPECT_DOUBLE_EQ(c.fixture.nominal_directivity_db, 30);
  EXPECT_EQ(c.find_role("switch"), nullptr);
  EXPECT_EQ(c.serial_pattern, "^[A-Za-z0-9._-]{1,64}$");
}

TEST(StationConfig, NullLogDirMeansNoLogFile) {
  testing::TempDir dir;
  std::string text = station_text();
  text.replace(text.find("  \"data_dir\""), 0, "  \"log_dir\": null,\n");
  StationConfig c = load_station_config(write(dir, text));
  EXPECT_TRUE(c.log_dir.empty());
}

TEST(StationConfig, SecondSourceIsRefusedAtItsLine) {
  testing::TempDir dir;
  const std::string prof = (testing::source_dir() / "config" / "instruments" / "sim-source.jsonc").string();
  ConfigError e = load_error(write(dir, station_text(",\n    {\"role\": \"source\", \"name\": \"gen2\", \"address\": \"tcp://h:1\", \"profile\": \"" + prof + "\"}")));
  EXPECT_EQ(e.key, "/instruments/2/role");
  EXPECT_EQ(e.line, 7);
}

TEST(StationConfig, ProfileForAnotherRoleIsRefused) {
  testing::TempDir dir;
  const std::string prof = (testing::source_dir() / "config" / "instruments" / "sim-source.jsonc").string();
  ConfigError e = load_error(write(dir, station_text(",\n    {\"role\": \"switch\", \"name\": \"sw\", \"address\": \"tcp://h:1\", \"profile\": \"" + prof + "\"}")));
  EXPECT_EQ(e.key, "/instruments/2/profile");
  EXPECT_NE(std::string(e.what()).find("for role source"), std::string::npos) << e.what();
}

TEST(StationConfig, BadAddressAndMissingProfileAreNamed) {
  testing::TempDir dir;
  std::string text = station_text();
  text.replace(text.find("tcp://127.0.0.1:1"), 17, "127.0.0.1:5025");
  ConfigError e = load_error(write(dir, text));
  EXPECT_EQ(e.key, "/instruments/0/address");
  EXPECT_EQ(e.line, 5);

  std::string text2 = station_text();
  text2.replace(text2.find("sim-source.jsonc"), 16, "nope.jsonc");
  ConfigError e2 = load_error(write(dir, text2));
  EXPECT_EQ(e2.key, "/instruments/0/profile");
  EXPECT_NE(std::string(e2.what()).find("does not exist"), std::string::npos);
}

TEST(StationConfig, AddressWithoutPortIsRefusedAtItsLine) {
  testing::TempDir dir;
  std::string text = station_text();
  text.replace(text.find("tcp://127.0.0.1:1"), 17, "tcp://127.0.0.1");
  ConfigError e = load_error(write(dir, text));
  EXPECT_EQ(e.key, "/instruments/0/address");
  EXPECT_EQ(e.line, 5);   // the source's line in station_text()
  EXPECT_NE(std::string(e.what()).find("missing :port"), std::string::npos) << e.what();

  std::string serial = station_text();
  serial.replace(serial.find("baud=9600"), 9, "baud=fast");
  ConfigError s = load_error(write(dir, serial));
  EXPECT_EQ(s.key, "/instruments/1/address");
  EXPECT_NE(std::string(s.what()).find("baud \"fast\""), std::string::npos) << s.what();
}

ConfigError override_error(StationConfig& c, const std::string& role, const std::string& address) {
  try {
    apply_address_override(c, role, address);
  } catch (const ConfigError& e) {
    return e;
  }
  ADD_FAILURE() << "no ConfigError for " << role << "=" << address;
  return ConfigError("", 0, "", "");
}

TEST(StationConfig, OverrideErrorsNameTheOptionAndItsValue) {
  testing::TempDir dir;
  StationConfig c = load_station_config(write(dir, station_text()));

  ConfigError port = override_error(c, "receiver", "tcp://127.0.0.1");
  EXPECT_EQ(std::string(port.what()).rfind("--override receiver=tcp://127.0.0.1: ", 0), 0u) << port.what();
  EXPECT_NE(std::string(port.what()).find("missing :port"), std::string::npos) << port.what();
  EXPECT_EQ(port.line, 0);   // no file line: the mistake is on the command line
  EXPECT_EQ(c.find_role("receiver")->address, "serial:/dev/ttyUSB0?baud=9600");   // left as loaded

  ConfigError typo = override_error(c, "reciever", "tcp://127.0.0.1:5026");
  EXPECT_EQ(std::string(typo.what()).rfind("--override reciever=tcp://127.0.0.1:5026: ", 0), 0u) << typo.what();
  EXPECT_NE(std::string(typo.what()).find("source, receiver and switch"), std::string::npos) << typo.what();

  ConfigError absent = override_error(c, "switch", "tcp://127.0.0.1:5027");
  EXPECT_NE(std::string(absent.what()).find("no switch instrument"), std::string::npos) << absent.what();
  EXPECT_NE(std::string(absent.what()).find("source, receiver"), std::string::npos) << absent.what();

  apply_address_override(c, "receiver", "tcp://[::1]:5026");
  EXPECT_EQ(c.find_role("receiver")->address, "tcp://[::1]:5026");
}

TEST(StationConfig, NonLoopbackApiNeedsAToken) {
  testing::TempDir dir;
  ConfigError e = load_error(write(dir, station_text("", ",\n  \"api\": {\"tcp_host\": \"0.0.0.0\", \"tcp_port\": 7000}")));
  EXPECT_EQ(e.key, "/api/tcp_host");
  StationConfig c = load_station_config(
      write(dir, station_text("", ",\n  \"api\": {\"tcp_host\": \"0.0.0.0\", \"tcp_port\": 7000, \"token_file\": \"tok\"}")));
  EXPECT_EQ(c.api.token_file, (dir.path() / "tok").lexically_normal());
  EXPECT_EQ(c.api.tcp_port, 7000);
}

TEST(StationConfig, PagesAreOffByDefaultAndLoopbackOnly) {
  testing::TempDir dir;
  StationConfig c = load_station_config(write(dir, station_text()));
  EXPECT_EQ(c.web.port, 0);
  EXPECT_EQ(c.web.host, "127.0.0.1");
  ConfigError range = load_error(write(dir, station_text("", ",\n  \"web\": {\"port\": 70000}")));
  EXPECT_EQ(range.key, "/web/port");
  ConfigError open = load_error(write(dir, station_text("", ",\n  \"web\": {\"host\": \"0.0.0.0\", \"port\": 8080}")));
  EXPECT_EQ(open.key, "/web/host");
  EXPECT_NE(std::string(open.what()).find("token_file"), std::string::npos) << open.what();
  c = load_station_config(write(
      dir, station_text("", ",\n  \"api\": {\"token_file\": \"tok\"},\n  \"web\": {\"host\": \"0.0.0.0\", \"port\": 8080}")));
  EXPECT_EQ(c.web.port, 8080);
}

TEST(StationConfig, OutOfRangeFixtureValueNamesUnitAndRange) {
  testing::TempDir dir;
  ConfigError e = load_error(write(dir, station_text("", ",\n  \"fixture\": {\"coupling_db\": -20}")));
  EXPECT_EQ(e.key, "/fixture/coupling_db");
  EXPECT_NE(std::string(e.what()).find("allowed 1 to 60 dB"), std::string::npos) << e.what();
}

TEST(StationConfig, BadSerialPatternIsRefused) {
  testing::TempDir dir;
  ConfigError e = load_error(write(dir, station_text("", ",\n  \"serial_pattern\": \"^[A-Z\"")));
  EXPECT_EQ(e.key, "/serial_pattern");
}

TEST(StationConfig, StationWithoutReceiverIsRefused) {
  testing::TempDir dir;
  std::string text = station_text();
  auto start = text.find(",\n    {\"role\": \"receiver\"");
  auto end = text.find("\n  ]");
  text.erase(start, end - start);
  ConfigError e = load_error(write(dir, text));
  EXPECT_EQ(e.key, "/instruments");
  EXPECT_NE(std::string(e.what()).find("no receiver"), std::string::npos);
}

}  // namespace
}  // namespace echoline::drivers
