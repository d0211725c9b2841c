// JSON-with-comments loading: line and key reporting, duplicate keys, trailing commas,
// comments, typed accessors. JSON syntax facts: RFC 8259 (no comments, no trailing commas;
// "names within an object SHOULD be unique"); comments are our documented extension.
#include "drivers/jsonc.hpp"

#include <gtest/gtest.h>

namespace echoline::drivers {
namespace {

using nlohmann::json;

ConfigError parse_error(const std::string& text) {
  try {
    JsoncDocument::parse(text, "t.jsonc");
  } catch (const ConfigError& e) {
    return e;
  }
  ADD_FAILURE() << "no ConfigError for: " << text;
  return ConfigError("", 0, "", "");
}

TEST(Jsonc, CommentsOfBothKindsAreIgnored) {
  auto doc = JsoncDocument::parse(R"({
    // line comment with "quotes" and { braces
    "a": 1, /* block
      comment */ "b": "x // not a comment /* nor this */",
    "c": [1, /* inside */ 2]
  })", "t.jsonc");
  EXPECT_EQ(doc.root()["a"], 1);
  EXPECT_EQ(doc.root()["b"], "x // not a comment /* nor this */");
  EXPECT_EQ(doc.root()["c"].size(), 2u);
  EXPECT_EQ(doc.line_of(JsonPointer("/a")), 3);
  EXPECT_EQ(doc.line_of(JsonPointer("/b")), 4);   // key after a block comment spanning lines 3-4
  EXPECT_EQ(doc.line_of(JsonPointer("/c/1")), 5);
}

TEST(Jsonc, LinesOfNestedKeysAndArrayElements) {
  auto doc = JsoncDocument::parse("{\n"                       // 1
                                  "  \"io\": {\n"             // 2
                                  "    \"timeout_ms\": 5,\n"  // 3
                                  "    \"s\": \"a\\\"}b\"\n"  // 4  escaped quote and brace in a string
                                  "  },\n"                    // 5
                                  "  \"list\": [\n"           // 6
                                  "    {\"x\": 1},\n"         // 7
                                  "    {\"x\": 2}\n"          // 8
                                  "  ]\n"                     // 9
                                  "}\n", "t.jsonc");
  EXPECT_EQ(doc.line_of(JsonPointer("")), 1);
  EXPECT_EQ(doc.line_of(JsonPointer("/io")), 2);
  EXPECT_EQ(doc.line_of(JsonPointer("/io/timeout_ms")), 3);
  EXPECT_EQ(doc.line_of(JsonPointer("/io/s")), 4);
  EXPECT_EQ(doc.line_of(JsonPointer("/list/0")), 7);
  EXPECT_EQ(doc.line_of(JsonPointer("/list/1/x")), 8);
  // Missing key: line of the nearest existing parent.
  EXPECT_EQ(doc.line_of(JsonPointer("/io/missing")), 2);
}

TEST(Jsonc, WrongTypeReportsFileLineAndKey) {
  auto doc = JsoncDocument::parse("{\n  \"limits\": {\n    \"min_power_dbm\": \"-10\"\n  }\n}", "p.jsonc");
  try {
    doc.require_number(JsonPointer("/limits/min_power_dbm"), "dBm");
    FAIL() << "no error";
  } catch (const ConfigError& e) {
    EXPECT_EQ(e.file, "p.jsonc");
    EXPECT_EQ(e.line, 3);
    EXPECT_EQ(e.key, "/limits/min_power_dbm");
    EXPECT_NE(std::string(e.what()).find("p.jsonc:3: /limits/min_power_dbm: expected a number in dBm"), std::string::npos)
        << e.what();
  }
}

TEST(Jsonc, UnknownKeyNamesKeyAndAllowedOnes) {
  auto doc = JsoncDocument::parse("{\n  \"io\": {\n    \"timeout_ms\": 1,\n    \"timout_ms\": 2\n  }\n}", "p.jsonc");
  try {
    doc.check_keys(JsonPointer("/io"), {"timeout_ms", "opc_timeout_ms"});
    FAIL() << "no error";
  } catch (const ConfigError& e) {
    EXPECT_EQ(e.line, 4);
    EXPECT_EQ(e.key, "/io/timout_ms");
    std::string what = e.what();
    EXPECT_NE(what.find("unknown key \"timout_ms\""), std::string::npos) << what;
    EXPECT_NE(what.find("did you mean \"timeout_ms\""), std::string::npos) << what;
    EXPECT_NE(what.find("allowed keys: timeout_ms, opc_timeout_ms"), std::string::npos) << what;
  }
}

TEST(Jsonc, DuplicateKeyIsAnErrorAtTheSecondOccurrence) {
  ConfigError e = parse_error("{\n  \"a\": {\n    \"k\": 1,\n    \"k\": 2\n  }\n}");
  EXPECT_EQ(e.line, 4);
  EXPECT_EQ(e.key, "/a/k");
  EXPECT_NE(std::string(e.what()).find("duplicate key \"k\" (first given on line 3)"), std::string::npos) << e.what();
}

TEST(Jsonc, SameKeyInDifferentObjectsIsFine) {
  auto doc = JsoncDocument::parse(R"({"a": {"k": 1}, "b": {"k": 2}, "c": [{"k": 1}, {"k": 2}]})", "t.jsonc");
  EXPECT_EQ(doc.root()["b"]["k"], 2);
}

TEST(Jsonc, TrailingCommaIsAnErrorWithItsLine) {
  ConfigError e = parse_error("{\n  \"a\": 1,\n  \"b\": 2,\n}\n");
  EXPECT_EQ(e.line, 4);   // the '}' that follows the comma
  EXPECT_NE(std::string(e.what()).find("trailing comma"), std::string::npos) << e.what();
  ConfigError e2 = parse_error("{\"list\": [\n 1,\n 2,\n ]}");
  EXPECT_EQ(e2.line, 4);
  EXPECT_NE(std::string(e2.what()).find("trailing comma"), std::string::npos) << e2.what();
}

TEST(Jsonc, SyntaxErrorGivesLineAndEnclosingKey) {
  ConfigError e = parse_error("{\n  // comment\n  \"io\": {\n    \"timeout_ms\": 12x\n  }\n}");
  EXPECT_EQ(e.line, 4);
  EXPECT_EQ(e.key, "/io/timeout_ms");
}

TEST(Jsonc, HashCommentsAreNotComments) {
  // nlohmann-json 3.11 with ignore_comments takes // and /* */ only (its parse() documentation);
  // '#' stays a syntax error.
  ConfigError e = parse_error("{\n# no\n\"a\": 1}");
  EXPECT_EQ(e.line, 2);
}

TEST(Jsonc, MissingFileNamesTheFile) {
  try {
    JsoncDocument::load("/nonexistent/echoline/x.jsonc");
    FAIL();
  } catch (const ConfigError& e) {
    EXPECT_EQ(e.file, "/nonexistent/echoline/x.jsonc");
    EXPECT_NE(std::string(e.what()).find("cannot open"), std::string::npos);
  }
}

TEST(Jsonc, TypedAccessorsAndDefaults) {
  auto doc = JsoncDocument::parse(R"({"n": 2.5, "i": 3, "f": 4.0, "s": "x", "b": true, "e": "never", "l": ["a", "b"]})", "t.jsonc");
  EXPECT_DOUBLE_EQ(doc.require_number(JsonPointer("/n"), "Hz"), 2.5);
  EXPECT_DOUBLE_EQ(doc.number_or(JsonPointer("/absent"), 7, "Hz"), 7);
  EXPECT_EQ(doc.require_integer(JsonPointer("/i")), 3);
  EXPECT_EQ(doc.require_integer(JsonPointer("/f")), 4);
  EXPECT_THROW(doc.require_integer(JsonPointer("/n")), ConfigError);
  EXPECT_EQ(doc.require_string(JsonPointer("/s")), "x");
  EXPECT_TRUE(doc.require_bool(JsonPointer("/b")));
  EXPECT_FALSE(doc.bool_or(JsonPointer("/absent"), false));
  EXPECT_EQ(doc.require_enum(JsonPointer("/e"), {"each-step", "never"}), "never");
  EXPECT_EQ(doc.string_list_or_empty(JsonPointer("/l")).size(), 2u);
  EXPECT_THROW(doc.require_enum(JsonPointer("/s"), {"each-step", "never"}), ConfigError);
  EXPECT_THROW(doc.require_string(JsonPointer("/missing")), ConfigError);
  EXPECT_THROW(doc.number_in(JsonPointer("/n"), 0, 3, 4, "dB"), ConfigError);
}

TEST(Jsonc, EnumErrorListsAllowedValues) {
  auto doc = JsoncDocument::parse("{\n\"check_errors\": \"always\"}", "p.jsonc");
  try {
    doc.require_enum(JsonPointer("/check_errors"), {"each-step", "end-of-sweep", "never"});
    FAIL();
  } catch (const ConfigError& e) {
    EXPECT_EQ(e.line, 2);
    EXPECT_NE(std::string(e.what()).find("expected one of: each-step, end-of-sweep, never"), std::string::npos);
  }
}

TEST(Jsonc, KeysWithSlashAndTildeUseEscapedPointers) {
  // RFC 6901: '~' is written "~0" and '/' is written "~1" in a JSON pointer.
  auto doc = JsoncDocument::parse("{\n\"a/b\": 1,\n\"c~d\": 2}", "t.jsonc");
  EXPECT_EQ(doc.line_of(JsonPointer("/a~1b")), 2);
  EXPECT_EQ(doc.line_of(JsonPointer("/c~0d")), 3);
}

TEST(Jsonc, KeyPathOfRootIsSlash) {
  EXPECT_EQ(key_path(JsonPointer("")), "/");
  EXPECT_EQ(key_path(JsonPointer("/commands/set_frequency")), "/commands/set_frequency");
}

// Regression (found by recipe_fuzz): a '/' that opens no comment used to stall the line scanner
// forever; it must be an ordinary syntax error with the file and line.
TEST(Jsonc, StraySlashIsASyntaxErrorNotAHang) {
  ConfigError e = parse_error("{\n  \"name\": 860/2\n}\n");
  EXPECT_EQ(e.line, 2);
  ConfigError lone = parse_error("/");
  EXPECT_NE(std::string(lone.what()).find("t.jsonc"), std::string::npos) << lone.what();
}

}  // namespace
}  // namespace echoline::drivers
