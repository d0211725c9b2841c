// SCPI parser and command tree against the SCPI-1999 / IEEE 488.2 header and data rules
// (SCPI-1999 Vol 1 ch. 6-7 and Vol 2 §21.8; IEEE 488.2 §7.7). Most checks go through the simulated source, whose tree
// holds the standard [SOURce:]FREQuency / POWer / OUTPut commands.
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include "simulator/command_tree.hpp"
#include "simulator/instrument.hpp"
#include "simulator/scpi_parser.hpp"

namespace echoline::sim {
namespace {

class SourceTree : public ::testing::Test {
 protected:
  World world;
  std::unique_ptr<SimInstrument> src = make_source_instrument(world, nlohmann::json::object());

  std::vector<Reply> send(std::string_view m) { return src->handle(m); }
  std::string ask(std::string_view m) {
    auto r = src->handle(m);
    EXPECT_EQ(r.size(), 1u) << m;
    return r.empty() ? std::string() : r[0].text;
  }
  double ask_number(std::string_view m) { return std::stod(ask(m)); }
  std::string next_error() { return ask("SYST:ERR?"); }
  int next_error_code() { return std::stoi(next_error()); }
};

double number(std::string_view param_text, Unit unit) {
  auto u = parse_unit("X " + std::string(param_text));
  auto* mu = std::get_if<MessageUnit>(&u);
  if (!mu || mu->params.size() != 1) return -12345;
  auto v = to_number(mu->params[0], unit, {0, 1, 0});
  auto* d = std::get_if<double>(&v);
  return d ? *d : -std::get<ScpiError>(v).code * 1e6;   // error code encoded for the assertion
}

int number_error(std::string_view param_text, Unit unit) {
  auto u = parse_unit("X " + std::string(param_text));
  auto* mu = std::get_if<MessageUnit>(&u);
  if (!mu) return std::get<ScpiError>(u).code;
  auto v = to_number(mu->params[0], unit, {0, 1, 0});
  auto* e = std::get_if<ScpiError>(&v);
  return e ? e->code : 0;
}

// SCPI-99 Vol 1 §6.2.1: short form, long form, any case.
TEST_F(SourceTree, ShortLongAndLowerCaseFormsAreAccepted) {
  send("FREQ 1e9");
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 1e9);
  send("FREQuency 2e9");
  EXPECT_DOUBLE_EQ(ask_number("FREQUENCY?"), 2e9);
  send("frequency 3e9");
  EXPECT_DOUBLE_EQ(ask_number("freq?"), 3e9);
  send("SOURce:FREQuency:CW 4e8");      // optional nodes given: [SOURce:] and [:CW|:FIXed]
  EXPECT_DOUBLE_EQ(ask_number("SOUR:FREQ:FIX?"), 4e8);
  send("POW:LEV:IMM:AMPL -7");          // [SOURce:]POWer[:LEVel][:IMMediate][:AMPLitude]
  EXPECT_DOUBLE_EQ(ask_number("SOURCE:POWER?"), -7);
  EXPECT_EQ(next_error(), "0,\"No error\"");
}

// SCPI-99 Vol 1 §6.2.1: only the exact short or long form; FREQU is -113 Undefined header.
TEST_F(SourceTree, PartialLongFormIsUndefinedHeader) {
  send("FREQ 1e9");
  send("FREQU 2e9");
  EXPECT_EQ(next_error_code(), -113);
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 1e9);
  send("SOURC:FREQ 2e9");
  EXPECT_EQ(next_error_code(), -113);
}

// SCPI-99 Vol 1 §6.2.4 (from memory): after ';' the path stays at the level
// of the previous header; a leading ':' resets to the root.
TEST_F(SourceTree, PathStaysAtCurrentLevelAfterSemicolon) {
  send(":SOUR:FREQ 1 MHZ;POW -10 DBM");
  EXPECT_EQ(next_error(), "0,\"No error\"");
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 1e6);
  EXPECT_DOUBLE_EQ(ask_number("POW?"), -10);
  // SOUR:SOUR:POW does not exist: the second SOUR is relative to SOUR.
  send("SOUR:FREQ 2 MHZ;SOUR:POW -12");
  EXPECT_EQ(next_error_code(), -113);
  // With ':' the second unit starts at the root again.
  send("SOUR:FREQ 3 MHZ;:SOUR:POW -13;:OUTP ON");
  EXPECT_EQ(next_error(), "0,\"No error\"");
  EXPECT_DOUBLE_EQ(ask_number("POW?"), -13);
  EXPECT_EQ(ask("OUTP?"), "1");
}

// The same rule across subsystems: after FREQ:SPAN the path is FREQ, so BAND means
// FREQ:BAND, which does not exist; ';:' starts again at the root.
TEST(ScpiPaths, RelativeHeaderInAnotherSubsystemNeedsAColon) {
  World world;
  auto rx = make_receiver_instrument(world, nlohmann::json::object());
  rx->handle("FREQ:SPAN 1 MHZ;BAND 10 KHZ");
  EXPECT_EQ(std::stoi(rx->handle("SYST:ERR?").at(0).text), -113);
  rx->handle("FREQ:SPAN 1 MHZ;:BAND 10 KHZ;:FREQ:CENT 1 GHZ;SPAN 2 MHZ");
  EXPECT_EQ(rx->handle("SYST:ERR?").at(0).text, "0,\"No error\"");
  EXPECT_EQ(std::stod(rx->handle("FREQ:SPAN?").at(0).text), 2e6);
}

// IEEE 488.2 §7.6.1.4 (from memory): common commands do not change the current path.
TEST_F(SourceTree, CommonCommandsLeaveThePathAlone) {
  send("SOUR:FREQ 5 MHZ;*CLS;POW -5");
  EXPECT_EQ(next_error(), "0,\"No error\"");
  EXPECT_DOUBLE_EQ(ask_number("POW?"), -5);
}

TEST_F(SourceTree, OneReplyPerQueryInOrder) {
  send("FREQ 1 GHZ;POW -3");
  auto r = send("FREQ?;POW?;*OPC?");
  ASSERT_EQ(r.size(), 3u);
  EXPECT_DOUBLE_EQ(std::stod(r[0].text), 1e9);
  EXPECT_DOUBLE_EQ(std::stod(r[1].text), -3);
  EXPECT_EQ(r[2].text, "1");
}

// SCPI-99 Vol 2 §21.8: -109 Missing parameter, -108 Parameter not allowed.
TEST_F(SourceTree, ParameterCountErrors) {
  send("FREQ");
  EXPECT_EQ(next_error_code(), -109);
  send("FREQ 1e9,2e9");
  EXPECT_EQ(next_error_code(), -108);
  send("*CLS 1");
  EXPECT_EQ(next_error_code(), -108);
}

// IEEE 488.2 §7.7.3 / SCPI-99 §21.8: -131 Invalid suffix, -138 Suffix not allowed.
TEST_F(SourceTree, SuffixErrors) {
  send("FREQ 1e9");
  send("FREQ 1 XHZ");
  EXPECT_EQ(next_error_code(), -131);
  send("FREQ 1 DBM");
  EXPECT_EQ(next_error_code(), -131);
  send("OUTP 1 HZ");
  EXPECT_EQ(next_error_code(), -138);
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 1e9);
}

// SCPI-99 Vol 1 §6.2.1: a mnemonic over 12 characters is -112.
TEST_F(SourceTree, MnemonicLongerThanTwelveIsTooLong) {
  send("FREQUENCYFREQ 1e9");
  EXPECT_EQ(next_error_code(), -112);
}

// IEEE 488.2 §7.4.1 (from memory): CR before LF is whitespace.
TEST_F(SourceTree, CarriageReturnIsWhitespace) {
  send("FREQ 7e8\r");
  send("POW? \r\n");
  EXPECT_EQ(next_error(), "0,\"No error\"");
  EXPECT_DOUBLE_EQ(ask_number("FREQ?\r"), 7e8);
}

// SCPI-99 Vol 1 §7.2.1 (from memory): MINimum / MAXimum / DEFault.
TEST_F(SourceTree, MinMaxDefault) {
  send("FREQ MAX");
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 6e9);
  send("FREQ minimum");
  EXPECT_DOUBLE_EQ(ask_number("FREQ?"), 9e3);
  EXPECT_DOUBLE_EQ(ask_number("FREQ? MAX"), 6e9);
  send("FREQ BANANA");
  EXPECT_EQ(next_error_code(), -141);   // invalid character data for a numeric parameter
}

// SCPI-99 Vol 1 §7.3 (from memory): booleans ON | OFF | 1 | 0.
TEST_F(SourceTree, Booleans) {
  send("OUTP ON");
  EXPECT_EQ(ask("OUTP?"), "1");
  send("OUTP 0");
  EXPECT_EQ(ask("OUTP?"), "0");
  send("OUTP 1");
  EXPECT_EQ(ask("OUTP:STAT?"), "1");
  send("OUTP off");
  EXPECT_EQ(ask("OUTP?"), "0");
  send("OUTP MAYBE");
  EXPECT_EQ(next_error_code(), -224);
  send("OUTP 'ON'");
  EXPECT_EQ(next_error_code(), -104);
}

// Query-only and command-only forms: SYST:ERR without '?' does not exist (-113).
TEST_F(SourceTree, QueryOnlyHeaderWithoutQuestionMarkIsUndefined) {
  send("SYST:ERR");
  EXPECT_EQ(next_error_code(), -113);
  send("*CLS?");
  EXPECT_EQ(next_error_code(), -113);
}

// A header or syntax error ends the program message (the rest is discarded; common
// practice, no source); the error is queued.
TEST_F(SourceTree, HeaderErrorDiscardsTheRestOfTheMessage) {
  auto r = send("FREQU 1e9;*IDN?");
  EXPECT_TRUE(r.empty());
  EXPECT_EQ(next_error_code(), -113);
}

// IEEE 488.2 Table 7-1 and §7.7.3 (as quoted in instrument programming manuals).
TEST(ScpiNumbers, SuffixMultipliers) {
  EXPECT_DOUBLE_EQ(number("1 MHZ", Unit::hertz), 1e6);     // MHZ is mega, not milli
  EXPECT_DOUBLE_EQ(number("1 MAHZ", Unit::hertz), 1e6);    // MA = mega
  EXPECT_DOUBLE_EQ(number("1 mhz", Unit::hertz), 1e6);     // case-insensitive, still mega
  EXPECT_DOUBLE_EQ(number("10 KHZ", Unit::hertz), 1e4);
  EXPECT_DOUBLE_EQ(number("2.45 GHZ", Unit::hertz), 2.45e9);
  EXPECT_DOUBLE_EQ(number("2.45GHZ", Unit::hertz), 2.45e9);
  EXPECT_DOUBLE_EQ(number("100 MS", Unit::seconds), 0.1);  // MS is milli-second
  EXPECT_DOUBLE_EQ(number("2 S", Unit::seconds), 2);
  EXPECT_DOUBLE_EQ(number("5 US", Unit::seconds), 5e-6);
  EXPECT_DOUBLE_EQ(number("20 NS", Unit::seconds), 20e-9);
  EXPECT_DOUBLE_EQ(number("-10 DBM", Unit::dbm), -10);
  EXPECT_DOUBLE_EQ(number("+1.5E+3", Unit::none), 1500);
  EXPECT_DOUBLE_EQ(number(".5", Unit::none), 0.5);
  EXPECT_DOUBLE_EQ(number("-.5e1", Unit::none), -5);
  EXPECT_EQ(number_error("1 KS", Unit::hertz), -131);
  EXPECT_EQ(number_error("1 KDBM", Unit::dbm), -131);      // no multipliers on dBm
  EXPECT_EQ(number_error("1 HZ", Unit::none), -138);
  EXPECT_EQ(number_error("1.2.3", Unit::none), -103);      // "1.2" then ".3" without a comma
  EXPECT_EQ(number_error("-", Unit::none), -120);
}

// IEEE 488.2 §7.7.4: non-decimal numeric #H, #Q, #B.
TEST(ScpiNumbers, NonDecimal) {
  EXPECT_DOUBLE_EQ(number("#H1F", Unit::none), 31);
  EXPECT_DOUBLE_EQ(number("#q17", Unit::none), 15);
  EXPECT_DOUBLE_EQ(number("#B101", Unit::none), 5);
  EXPECT_EQ(number_error("#B102", Unit::none), -120);
}

// SCPI-99 Vol 1 §6.2.5: numeric keyword suffix, default 1.
TEST(ScpiHeaders, NumericSuffixOnKeyword) {
  auto u = parse_unit("CALC:Marker2:X?");
  ASSERT_TRUE(std::holds_alternative<MessageUnit>(u));
  const auto& m = std::get<MessageUnit>(u);
  ASSERT_EQ(m.keywords.size(), 3u);
  EXPECT_EQ(m.keywords[1].mnemonic, "MARKER");
  EXPECT_EQ(m.keywords[1].suffix, 2);
  EXPECT_FALSE(m.keywords[0].suffix.has_value());
  EXPECT_TRUE(m.query);
}

TEST(ScpiHeaders, SuffixOutOfRangeIsMinus114) {
  // SCPI-99 Vol 1 §6.2.5.2 (cited in the -114 text): suffix out of range.
  CommandTree tree;
  StatusModel status;
  int seen = 0;
  tree.add("CALCulate:MARKer{1:4}:X?", [&](const Call& c) { seen = c.suffix(); return Outcome::text("0"); });
  EXPECT_EQ(tree.execute("CALC:MARK3:X?", status, 0).size(), 1u);
  EXPECT_EQ(seen, 3);
  EXPECT_EQ(tree.execute("CALC:MARK:X?", status, 0).size(), 1u);
  EXPECT_EQ(seen, 1);                                    // default 1
  EXPECT_TRUE(tree.execute("CALC:MARK5:X?", status, 0).empty());
  EXPECT_EQ(status.pop_error().substr(0, 5), "-114,");
  EXPECT_TRUE(tree.execute("CALC2:MARK:X?", status, 0).empty());   // CALCulate takes no suffix here
  EXPECT_EQ(status.pop_error().substr(0, 5), "-113,");
}

TEST(ScpiHeaders, ShortFormsDerivedFromUppercasePart) {
  // SCPI-99 Vol 1 ch. 6: the uppercase part is the short form.
  EXPECT_EQ(mnemonic_forms("FREQuency").short_form, "FREQ");
  EXPECT_EQ(mnemonic_forms("FREQuency").long_form, "FREQUENCY");
  EXPECT_EQ(mnemonic_forms("CW").short_form, "CW");
  EXPECT_TRUE(mnemonic_matches("bwid", "BWIDth"));
  EXPECT_FALSE(mnemonic_matches("BWIDT", "BWIDth"));
}

// IEEE 488.2 §7.3.3 / §7.7.5 / §7.7.6: ';' inside strings and blocks does not split.
TEST(ScpiMessages, SplitRespectsStringsAndBlocks) {
  auto s = split_units("A 'x;y';B #15ab;de;C \"q\"\"; \"");
  ASSERT_TRUE(std::holds_alternative<std::vector<std::string_view>>(s));
  const auto& units = std::get<std::vector<std::string_view>>(s);
  ASSERT_EQ(units.size(), 3u);
  auto b = parse_unit(units[1]);
  ASSERT_TRUE(std::holds_alternative<MessageUnit>(b));
  EXPECT_EQ(std::get<MessageUnit>(b).params.at(0).kind, Parameter::Kind::block);
  EXPECT_EQ(std::get<MessageUnit>(b).params.at(0).text, "ab;de");
  auto c = parse_unit(units[2]);
  EXPECT_EQ(std::get<MessageUnit>(c).params.at(0).text, "q\"; ");   // doubled quote inside
}

TEST(ScpiMessages, MalformedDataGivesTheStandardNumbers) {
  // SCPI-99 Vol 2 §21.8 numbers (SYSTem:ERRor).
  auto code = [](std::string_view text) {
    auto u = parse_unit(text);
    return std::holds_alternative<ScpiError>(u) ? std::get<ScpiError>(u).code : 0;
  };
  EXPECT_EQ(code("X 'open"), -151);        // unterminated string
  EXPECT_EQ(code("X #X12"), -161);         // non-digit after '#'
  EXPECT_EQ(code("X #290ab"), -161);       // block shorter than its header says
  EXPECT_EQ(code("X 1 2"), -103);          // missing ',' between parameters
  EXPECT_EQ(code("X 1,"), -102);           // nothing after ','
  EXPECT_EQ(code("X:"), -102);             // empty node
  EXPECT_EQ(code("X::Y 1"), -102);
  EXPECT_EQ(code("X,1"), -111);            // no whitespace between header and data
  EXPECT_EQ(code("X @"), -101);
  auto ch = parse_unit("ROUT:CLOS (@1,3:5)");
  ASSERT_TRUE(std::holds_alternative<MessageUnit>(ch));
  EXPECT_EQ(std::get<MessageUnit>(ch).params.at(0).channels, (std::vector<int>{1, 3, 4, 5}));
  EXPECT_EQ(code("ROUT:CLOS (@1,"), -170);
  auto split = split_units("A 'x;y");
  EXPECT_TRUE(std::holds_alternative<ScpiError>(split));
}

TEST(ScpiNumbers, Nr3FormattingRoundTrips) {
  // IEEE 488.2 §8.7.2 (from memory): NR3 has an explicit point and exponent.
  EXPECT_EQ(format_nr3(915e6), "9.15E+08");
  EXPECT_EQ(format_nr3(-10), "-1.0E+01");
  EXPECT_EQ(std::stod(format_nr3(-47.123456789012345)), -47.123456789012345);
  EXPECT_EQ(format_nr3(std::numeric_limits<double>::quiet_NaN()), "9.91E+37");   // SCPI NAN (memory)
}

}  // namespace
}  // namespace echoline::sim
