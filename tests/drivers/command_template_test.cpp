// Command templates: placeholder checks per operation, expansion, locale-independent numbers.
#include "drivers/command_template.hpp"

#include <clocale>
#include <locale>

#include <gtest/gtest.h>

namespace echoline::drivers {
namespace {

CommandTemplate parsed(std::string_view role, std::string_view op, std::string_view text) {
  auto t = CommandTemplate::parse(role, op, text);
  EXPECT_TRUE(t.ok()) << (t.ok() ? "" : t.error().message);
  return t.ok() ? t.value() : CommandTemplate{};
}

TEST(CommandTemplate, ExpandsFrequencyExactlyInHz) {
  auto t = parsed("source", "set_frequency", "FREQ:CW {frequency_hz}");
  EXPECT_EQ(t.expand({{"frequency_hz", 915e6}}).value(), "FREQ:CW 915000000");
  EXPECT_EQ(t.expand({{"frequency_hz", 2483.5e6}}).value(), "FREQ:CW 2483500000");
  // 1 Hz resolution at 6 GHz and sub-Hz values survive (shortest round-trip text).
  EXPECT_EQ(t.expand({{"frequency_hz", 5999999999.0}}).value(), "FREQ:CW 5999999999");
  EXPECT_EQ(t.expand({{"frequency_hz", 902000000.25}}).value(), "FREQ:CW 902000000.25");
}

TEST(CommandTemplate, RoundTripsEveryDigit) {
  for (double v : {915e6 + 0.1, 1.0 / 3.0, -10.5, 123456789.123, 1e-7}) {
    std::string s = format_wire_number(v);
    EXPECT_EQ(std::stod(s), v) << s;
  }
}

TEST(CommandTemplate, StateTokensAndMaxHoldFromTheProfile) {
  // SCPI-1999 Vol 1 7.3: boolean program data ON | OFF.
  auto out = parsed("source", "set_output", "OUTP {state}");
  EXPECT_EQ(out.expand({{"state", true}}).value(), "OUTP ON");
  EXPECT_EQ(out.expand({{"state", false}}).value(), "OUTP OFF");
  // Max hold is two whole commands from the profile; no vendor token is compiled in.
  EXPECT_EQ(parsed("receiver", "max_hold_on", "TRAC1:MODE MAXH").expand({}).value(), "TRAC1:MODE MAXH");
  auto old = CommandTemplate::parse("receiver", "set_max_hold", "TRAC1:MODE {trace_mode}");
  ASSERT_FALSE(old.ok());
  EXPECT_NE(old.error().message.find("max_hold_on and max_hold_off"), std::string::npos) << old.error().message;
  auto token = CommandTemplate::parse("receiver", "max_hold_on", "TRAC1:MODE {trace_mode}");
  ASSERT_FALSE(token.ok());
  EXPECT_NE(token.error().message.find("unknown placeholder {trace_mode}"), std::string::npos) << token.error().message;
}

TEST(CommandTemplate, SwitchPositionAndLiteralBraces) {
  auto t = parsed("switch", "select", "ROUT:CLOS (@{position})");
  EXPECT_EQ(t.expand({{"position", std::string("3")}}).value(), "ROUT:CLOS (@3)");
  auto b = parsed("switch", "select", "X {{{position}}}");
  EXPECT_EQ(b.expand({{"position", std::string("1")}}).value(), "X {1}");
}

TEST(CommandTemplate, UnknownPlaceholderIsRefusedNamingKnownOnes) {
  auto t = CommandTemplate::parse("source", "set_frequency", "FREQ:CW {freq}");
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.error().message.find("unknown placeholder {freq}"), std::string::npos) << t.error().message;
  EXPECT_NE(t.error().message.find("{frequency_hz}"), std::string::npos);
}

TEST(CommandTemplate, PlaceholderNotAllowedForOperation) {
  auto t = CommandTemplate::parse("source", "set_power", "POW {frequency_hz}");
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.error().message.find("not allowed in set_power; allowed: {power_dbm}"), std::string::npos) << t.error().message;
}

TEST(CommandTemplate, UnknownOperationListsKnownOnes) {
  auto t = CommandTemplate::parse("source", "set_frequncy", "FREQ {frequency_hz}");
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.error().message.find("unknown operation \"set_frequncy\""), std::string::npos);
  EXPECT_NE(t.error().message.find("set_frequency"), std::string::npos);
  // A receiver operation is unknown for a source.
  EXPECT_FALSE(CommandTemplate::parse("source", "set_center", "FREQ:CENT {frequency_hz}").ok());
}

TEST(CommandTemplate, ValueOperationMustUseItsPlaceholder) {
  EXPECT_FALSE(CommandTemplate::parse("source", "set_frequency", "FREQ:CW 1GHZ").ok());
}

TEST(CommandTemplate, QueryMarkMustMatchTheOperation) {
  // A reply nobody reads would be taken as the next query's answer (IEEE 488.2 message exchange;
  // common practice, no source for the exact failure).
  EXPECT_FALSE(CommandTemplate::parse("receiver", "read_marker_y", "CALC:MARK:Y").ok());
  EXPECT_FALSE(CommandTemplate::parse("receiver", "trigger", "INIT:IMM;*OPC?").ok());
  EXPECT_TRUE(CommandTemplate::parse("receiver", "read_marker_y", "CALC:MARK:Y?").value().is_query());
}

TEST(CommandTemplate, BadBracesAndTerminators) {
  EXPECT_FALSE(CommandTemplate::parse("source", "set_power", "POW {power_dbm").ok());
  EXPECT_FALSE(CommandTemplate::parse("source", "set_power", "POW power_dbm}").ok());
  EXPECT_FALSE(CommandTemplate::parse("source", "set_power", "POW {power_dbm}\n").ok());
  EXPECT_FALSE(CommandTemplate::parse("source", "set_power", "  ").ok());
}

TEST(CommandTemplate, ExpandRefusesMissingWrongOrUnsafeValues) {
  auto t = parsed("source", "set_power", "POW {power_dbm}");
  EXPECT_FALSE(t.expand({}).ok());
  EXPECT_FALSE(t.expand({{"power_dbm", true}}).ok());
  EXPECT_FALSE(t.expand({{"power_dbm", std::numeric_limits<double>::quiet_NaN()}}).ok());
  EXPECT_FALSE(t.expand({{"power_dbm", std::numeric_limits<double>::infinity()}}).ok());
  auto s = parsed("switch", "select", "ROUT:CLOS (@{position})");
  EXPECT_FALSE(s.expand({{"position", std::string("1);*RST;(@2")}}).ok());   // ';' would add a command
  EXPECT_FALSE(s.expand({{"position", std::string("")}}).ok());
}

// A numpunct facet with a comma decimal point, as de_DE uses.
struct CommaDecimal : std::numpunct<char> {
  char do_decimal_point() const override { return ','; }
  char do_thousands_sep() const override { return '.'; }
  std::string do_grouping() const override { return "\3"; }
};

TEST(CommandTemplate, NumbersUseADotInAnyLocale) {
  // SCPI-1999 / IEEE 488.2 §7.7.2: decimal numeric data uses '.' as the radix point.
  std::locale old = std::locale::global(std::locale(std::locale::classic(), new CommaDecimal));
  const char* c_locale = std::setlocale(LC_NUMERIC, "de_DE.UTF-8");   // may be absent; the facet suffices
  auto f = parsed("source", "set_frequency", "FREQ:CW {frequency_hz}");
  auto p = parsed("source", "set_power", "POW {power_dbm}");
  std::string freq = f.expand({{"frequency_hz", 915e6}}).value();
  std::string pow = p.expand({{"power_dbm", -10.5}}).value();
  std::locale::global(old);
  std::setlocale(LC_NUMERIC, "C");
  (void)c_locale;
  EXPECT_EQ(freq, "FREQ:CW 915000000");
  EXPECT_EQ(pow, "POW -10.5");
}

TEST(CommandTemplate, EveryRoleHasItsRequiredOperations) {
  int required = 0;
  for (const auto& op : operation_table())
    if (op.required) ++required;
  EXPECT_NE(find_operation("source", "set_frequency"), nullptr);
  EXPECT_NE(find_operation("receiver", "read_trace"), nullptr);
  EXPECT_NE(find_operation("switch", "select"), nullptr);
  EXPECT_EQ(find_operation("switch", "set_frequency"), nullptr);
  EXPECT_EQ(required, 3 + 11 + 1);
}

}  // namespace
}  // namespace echoline::drivers
