// Instrument profiles: every shipped profile loads; errors name file, line and key;
// identity matching against *IDN? (IEEE 488.2 §10.14: four fields manufacturer,model,serial,firmware).
#include "drivers/profile.hpp"

#include <fstream>
#include <iterator>

#include <gtest/gtest.h>

#include "tests/support/process.hpp"

namespace echoline::drivers {
namespace {

std::filesystem::path instruments_dir() { return testing::source_dir() / "config" / "instruments"; }

std::filesystem::path write(const testing::TempDir& dir, const std::string& name, const std::string& text) {
  auto p = dir / name;
  std::ofstream(p) << text;
  return p;
}

ConfigError load_error(const std::filesystem::path& p) {
  try {
    load_profile(p);
  } catch (const ConfigError& e) {
    return e;
  }
  ADD_FAILURE() << "no ConfigError for " << p;
  return ConfigError("", 0, "", "");
}

const char* kSourceProfile = R"({
  "name": "t-source",
  "role": "source",
  "limits": { "min_frequency_hz": 1e6, "max_frequency_hz": 3e9, "min_power_dbm": -90, "max_power_dbm": 10 },
  "commands": {
    "set_frequency": "FREQ {frequency_hz}",
    "set_power": "POW {power_dbm}",
    "set_output": "OUTP {state}"
  }
})";

TEST(Profile, EveryShippedProfileLoads) {
  int count = 0;
  for (const auto& entry : std::filesystem::directory_iterator(instruments_dir())) {
    if (entry.path().extension() != ".jsonc") continue;
    SCOPED_TRACE(entry.path().string());
    Profile p;
    ASSERT_NO_THROW(p = load_profile(entry.path()));
    EXPECT_EQ(p.name, entry.path().stem().string());   // file name and profile name agree
    for (const auto& op : operation_table())
      if (op.role == p.role && op.required) {
        EXPECT_TRUE(p.has(op.name) || (op.may_be_absent && p.declares_absent(op.name))) << op.name;
      }
    ++count;
  }
  EXPECT_GE(count, 6);
}

TEST(Profile, SimProfilesMatchTheSimulator) {
  Profile src = load_profile(instruments_dir() / "sim-source.jsonc");
  EXPECT_EQ(src.identity_manufacturer, "Echoline");
  EXPECT_EQ(src.identity_model, "SIM-SRC");
  EXPECT_EQ(src.command("set_frequency").expand({{"frequency_hz", 915e6}}).value(), "FREQ:CW 915000000");
  Profile rcv = load_profile(instruments_dir() / "sim-receiver.jsonc");
  EXPECT_EQ(rcv.identity_model, "SIM-SA");   // config/sim/bench.jsonc: "Echoline,SIM-SA,SA0001,1.0"
  EXPECT_DOUBLE_EQ(rcv.max_safe_input_dbm, 20);
  EXPECT_EQ(rcv.command("read_marker_y").text(), "CALC:MARK1:Y?");
  Profile sw = load_profile(instruments_dir() / "sim-switch.jsonc");
  EXPECT_EQ(sw.identity_model, "SIM-SW");
  // The simulator's switch channels: OPEN=1 SHORT=2 LOAD=3 DUT=4.
  EXPECT_EQ(sw.positions.at("OPEN"), "1");
  EXPECT_EQ(sw.positions.at("MISMATCH-B"), "6");   // the kit's mismatch standards have positions too
  EXPECT_EQ(sw.positions.at("DUT"), "4");
  EXPECT_EQ(sw.command("select").expand({{"position", sw.positions.at("LOAD")}}).value(), "ROUT:CLOS (@3)");
}

TEST(Profile, MinimalSourceGetsDefaults) {
  testing::TempDir dir;
  Profile p = load_profile(write(dir, "s.jsonc", kSourceProfile));
  EXPECT_EQ(p.check_errors, "each-step");
  EXPECT_EQ(p.io.timeout.count(), 2000);
  EXPECT_EQ(p.io.write_terminator, "\n");
  EXPECT_TRUE(p.reset_on_initialize);
  EXPECT_EQ(p.identity_manufacturer, "");
  EXPECT_DOUBLE_EQ(p.max_frequency_hz, 3e9);
}

TEST(Profile, WrongTypeReportsItsLineAndKey) {
  testing::TempDir dir;
  auto p = write(dir, "bad.jsonc",
                 "{\n"
                 "  \"name\": \"x\",\n"
                 "  \"role\": \"source\",\n"
                 "  \"io\": {\n"
                 "    \"timeout_ms\": \"fast\"\n"   // line 5
                 "  },\n"
                 "  \"commands\": {}\n"
                 "}\n");
  ConfigError e = load_error(p);
  EXPECT_EQ(e.file, p.string());
  EXPECT_EQ(e.line, 5);
  EXPECT_EQ(e.key, "/io/timeout_ms");
  EXPECT_NE(std::string(e.what()).find(p.string() + ":5: /io/timeout_ms: expected a number in ms"), std::string::npos) << e.what();
}

TEST(Profile, TypoInKeyNamesAllowedKeys) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("\"limits\""), 8, "\"limtis\"");
  ConfigError e = load_error(write(dir, "typo.jsonc", text));
  EXPECT_EQ(e.line, 4);
  EXPECT_EQ(e.key, "/limtis");
  EXPECT_NE(std::string(e.what()).find("did you mean \"limits\""), std::string::npos) << e.what();
  EXPECT_NE(std::string(e.what()).find("allowed keys: name, role"), std::string::npos) << e.what();
}

TEST(Profile, UnknownOperationAndPlaceholderNameTheLineAndKey) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("\"set_power\""), 11, "\"set_level\"");
  ConfigError e = load_error(write(dir, "op.jsonc", text));
  EXPECT_EQ(e.line, 7);
  EXPECT_EQ(e.key, "/commands/set_level");
  EXPECT_NE(std::string(e.what()).find("unknown operation \"set_level\""), std::string::npos) << e.what();

  std::string text2 = kSourceProfile;
  text2.replace(text2.find("{power_dbm}"), 11, "{dbm}");
  ConfigError e2 = load_error(write(dir, "ph.jsonc", text2));
  EXPECT_EQ(e2.line, 7);
  EXPECT_EQ(e2.key, "/commands/set_power");
  EXPECT_NE(std::string(e2.what()).find("unknown placeholder {dbm}"), std::string::npos) << e2.what();
}

TEST(Profile, MissingRequiredOperationIsNamed) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("\"set_output\": \"OUTP {state}\""), 28, "\"sweep_mode\": \"FREQ:MODE {mode}\"");
  ConfigError e = load_error(write(dir, "miss.jsonc", text));
  EXPECT_EQ(e.key, "/commands");
  EXPECT_NE(std::string(e.what()).find("\"set_output\" is required"), std::string::npos) << e.what();
}

TEST(Profile, ReceiverWithoutVbwReferenceLevelOrAttenuatorLoads) {
  Profile p = load_profile(instruments_dir() / "sim-basic-receiver.jsonc");
  for (const char* op : {"set_vbw", "set_reference_level", "set_attenuation"}) {
    EXPECT_TRUE(p.declares_absent(op)) << op;
    EXPECT_FALSE(p.has(op)) << op;
  }
  EXPECT_TRUE(p.has("set_rbw"));
}

TEST(Profile, OnlySomeOperationsMayBeDeclaredAbsent) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  // The source cannot work without an output switch.
  text.replace(text.find("\"OUTP {state}\""), 14, "null");
  ConfigError e = load_error(write(dir, "nooutput.jsonc", text));
  EXPECT_EQ(e.key, "/commands/set_output");
  EXPECT_NE(std::string(e.what()).find("cannot be declared absent"), std::string::npos) << e.what();
  // A receiver that simply omits set_vbw is told how to declare it absent.
  std::string rx;
  {
    std::ifstream in(instruments_dir() / "sim-basic-receiver.jsonc");
    rx.assign(std::istreambuf_iterator<char>(in), {});
  }
  const std::string vbw = "\"set_vbw\": null,";
  rx.erase(rx.find(vbw), vbw.size());
  ConfigError m = load_error(write(dir, "novbw.jsonc", rx));
  EXPECT_EQ(m.key, "/commands");
  EXPECT_NE(std::string(m.what()).find("write \"set_vbw\": null if the instrument has none"), std::string::npos) << m.what();
}

TEST(Profile, ReceiverNeedsItsMaxSafeInput) {
  // Equipment safety: no default for the analyzer's damage level.
  testing::TempDir dir;
  std::string text = R"({
  "name": "r", "role": "receiver",
  "limits": { "min_frequency_hz": 9e3, "max_frequency_hz": 3e9, "min_power_dbm": -100, "max_power_dbm": 20 },
  "receiver": { "noise_figure_db": 24 },
  "commands": {}
})";
  ConfigError e = load_error(write(dir, "r.jsonc", text));
  EXPECT_EQ(e.key, "/receiver/max_safe_input_dbm");
  EXPECT_EQ(e.line, 4);
}

TEST(Profile, InvertedLimitsAreRefused) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("3e9"), 3, "1e5");
  ConfigError e = load_error(write(dir, "lim.jsonc", text));
  EXPECT_EQ(e.key, "/limits/max_frequency_hz");
}

TEST(Profile, InitLinesMayNotBeQueries) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("\"commands\""), 0, "\"init\": [\"*RST\", \"*IDN?\"],\n  ");
  ConfigError e = load_error(write(dir, "init.jsonc", text));
  EXPECT_EQ(e.key, "/init/1");
}

// Switch positions: OPEN, SHORT, LOAD, DUT and a kit's mismatch standards (capitals, digits, '-');
// anything else is a typo, refused with its key.
TEST(Profile, SwitchPositionsAreStandardNames) {
  testing::TempDir dir;
  std::ifstream in(instruments_dir() / "sim-switch.jsonc");
  const std::string good((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  std::string text = good;
  const std::string from = "\"MISMATCH-A\": \"5\"";
  ASSERT_NE(text.find(from), std::string::npos);
  text.replace(text.find(from), from.size(), "\"Mismatch A\": \"5\"");
  ConfigError e = load_error(write(dir, "sw.jsonc", text));
  EXPECT_EQ(e.key, "/switch/positions/Mismatch A");
}

TEST(Profile, SectionForAnotherRoleIsRefused) {
  testing::TempDir dir;
  std::string text = kSourceProfile;
  text.replace(text.find("\"commands\""), 0, "\"switch\": {\"positions\": {\"OPEN\": \"1\"}},\n  ");
  ConfigError e = load_error(write(dir, "sw.jsonc", text));
  EXPECT_EQ(e.key, "/switch");
}

// The "sweep" section (fast capture): loaded as given; shipped sim profiles carry the
// simulator's own figures (1 ms shortest ramp, 0.1 ms shortest sweep, 10001 points).
TEST(Profile, SweepSectionLoadsAndIsChecked) {
  const Profile src = load_profile(instruments_dir() / "sim-source.jsonc");
  EXPECT_EQ(src.sweep.min_time_s, 1e-3);
  EXPECT_EQ(src.sweep.max_time_s, 1000);
  const Profile rx = load_profile(instruments_dir() / "sim-receiver.jsonc");
  EXPECT_EQ(rx.sweep.min_time_s, 1e-4);
  EXPECT_EQ(rx.sweep.max_points, 10001);
  ASSERT_FALSE(rx.sweep.rbw_steps_hz.empty());
  EXPECT_EQ(rx.sweep.rbw_steps_hz.back(), 10e6);
  testing::TempDir dir;
  auto with = [&](const std::string& sweep) {
    std::string text = kSourceProfile;
    text.replace(text.find("\"commands\""), 0, "\"sweep\": " + sweep + ",\n  ");
    return write(dir, "sweep.jsonc", text);
  };
  EXPECT_EQ(load_profile(with(R"({"time_range_s": [0.002, 10], "retrace_s": 0.001})")).sweep.retrace_s, 0.001);
  EXPECT_EQ(load_error(with(R"({"time_range_s": [10, 0.002]})")).key, "/sweep/time_range_s");
  EXPECT_EQ(load_error(with(R"({"time_range_s": [0.002]})")).key, "/sweep/time_range_s");
  // A receiver's keys in a source profile.
  EXPECT_EQ(load_error(with(R"({"rbw_steps_hz": [1e3]})")).key, "/sweep/rbw_steps_hz");
  testing::TempDir rdir;
  std::string rtext = R"({
  "name": "r", "role": "receiver",
  "limits": { "min_frequency_hz": 9e3, "max_frequency_hz": 3e9, "min_power_dbm": -100, "max_power_dbm": 20 },
  "receiver": { "max_safe_input_dbm": 10, "noise_figure_db": 24 },
  "sweep": { "rbw_steps_hz": [1e3, 3e3, 3e3] },
  "commands": {}
})";
  ConfigError e = load_error(write(rdir, "r.jsonc", rtext));
  EXPECT_EQ(e.key, "/sweep/rbw_steps_hz/2");
  EXPECT_EQ(e.line, 5);
}

TEST(Profile, IdentityPatterns) {
  EXPECT_TRUE(identity_field_matches("", "anything"));
  EXPECT_TRUE(identity_field_matches("SIM-SRC", "SIM-SRC"));
  EXPECT_FALSE(identity_field_matches("SIM-SRC", "SIM-SRCX"));
  EXPECT_TRUE(identity_field_matches("SIM-*", "SIM-RCV"));
  EXPECT_TRUE(identity_field_matches("N?1*0", "NX1230"));
  EXPECT_FALSE(identity_field_matches("SIM-*", "sim-rcv"));   // case-sensitive
  EXPECT_TRUE(identity_field_matches("*", ""));
}

TEST(Profile, IdentityMismatchSaysWhatWasExpectedAndWhatCame) {
  Profile p;
  p.name = "sim-receiver";
  p.identity_manufacturer = "Echoline";
  p.identity_model = "SIM-RCV";
  scpi::Identity ok{"Echoline", "SIM-RCV", "RCV0001", "1.0"};
  EXPECT_TRUE(check_identity(ok, p, "analyzer").ok());
  scpi::Identity wrong{"Echoline", "SIM-SRC", "SRC0001", "1.0"};
  Status s = check_identity(wrong, p, "analyzer");
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::config);
  EXPECT_EQ(s.error().message,
            "analyzer: identity: profile sim-receiver expects manufacturer \"Echoline\" model \"SIM-RCV\", "
            "instrument says \"Echoline,SIM-SRC,SRC0001,1.0\"");
}

}  // namespace
}  // namespace echoline::drivers
