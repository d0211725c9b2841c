// Fault injection: the pure FaultSet (reproducible, probabilities honoured), and each fault kind
// as a client of the real echoline-sim sees it through the real drivers.
#include <chrono>

#include <gtest/gtest.h>

#include "drivers/scpi_codec.hpp"
#include "simulator/faults.hpp"
#include "tests/simulator/sim_fixture.hpp"

namespace echoline::sim::testing {
namespace {

FaultSpec spec(FaultKind kind, double probability, std::uint64_t seed) {
  FaultSpec s;
  s.kind = kind;
  s.probability = probability;
  s.seed = seed;
  return s;
}

std::vector<bool> firings(FaultKind kind, double probability, std::uint64_t seed, int n) {
  FaultSet set;
  set.arm(spec(kind, probability, seed));
  std::vector<bool> out;
  for (int i = 0; i < n; ++i) out.push_back(!set.on_reply("1.0E+09", false).applied.empty());
  return out;
}

TEST(FaultSet, SameSeedGivesTheSameFirings) {
  EXPECT_EQ(firings(FaultKind::no_reply, 0.5, 42, 200), firings(FaultKind::no_reply, 0.5, 42, 200));
  EXPECT_NE(firings(FaultKind::no_reply, 0.5, 42, 200), firings(FaultKind::no_reply, 0.5, 43, 200));
}

TEST(FaultSet, ProbabilityZeroNeverFiresAndOneAlwaysFires) {
  for (bool f : firings(FaultKind::garble, 0.0, 1, 500)) EXPECT_FALSE(f);
  for (bool f : firings(FaultKind::garble, 1.0, 1, 500)) EXPECT_TRUE(f);
}

TEST(FaultSet, HalfProbabilityFiresAboutHalfTheTime) {
  int n = 0;
  for (bool f : firings(FaultKind::slow_reply, 0.5, 7, 4000)) n += f ? 1 : 0;
  // Binomial(4000, 0.5): sd = 31.6; +-6 sd (common practice, no source) cannot fail by chance.
  EXPECT_NEAR(n, 2000, 190);
}

TEST(FaultSet, GarbleChangesTheReplyWithoutAddingATerminator) {
  FaultSet set;
  set.arm(spec(FaultKind::garble, 1.0, 3));
  for (const char* text : {"1", "9.15E+08", "#18ABCDEFGH", "Echoline,SIM-SRC,SRC0001,1.0", ""}) {
    ReplyPlan p = set.on_reply(text, false);
    EXPECT_TRUE(p.send);
    EXPECT_NE(p.text, text);
    EXPECT_EQ(p.text.find('\n'), std::string::npos);
    // A garbled number must not parse as a number (the client sees a protocol error).
    if (std::string(text) == "9.15E+08") {
      EXPECT_FALSE(scpi::parse_number(p.text).ok()) << p.text;
    }
  }
}

TEST(FaultSet, WrongIdentityOnlyTouchesIdentityReplies) {
  FaultSet set;
  set.arm(spec(FaultKind::wrong_identity, 1.0, 1));
  EXPECT_EQ(set.on_reply("1", false).text, "1");
  ReplyPlan p = set.on_reply("Echoline,SIM-SA,SA0001,1.0", true);
  EXPECT_NE(p.text, "Echoline,SIM-SA,SA0001,1.0");
  // Still a valid *IDN? reply: four fields (IEEE 488.2 *IDN? format).
  EXPECT_TRUE(scpi::parse_identity(p.text).ok()) << p.text;
}

TEST(FaultSet, DropAndNoReplySwallowTheReply) {
  FaultSet drop;
  drop.arm(spec(FaultKind::drop, 1.0, 1));
  ReplyPlan d = drop.on_reply("1", false);
  EXPECT_FALSE(d.send);
  EXPECT_TRUE(d.drop_connection);
  FaultSet none;
  none.arm(spec(FaultKind::no_reply, 1.0, 1));
  ReplyPlan n = none.on_reply("1", false);
  EXPECT_FALSE(n.send);
  EXPECT_FALSE(n.drop_connection);
}

TEST(FaultSet, ErrorEntryFiresPerMessageAndDisarmStopsIt) {
  FaultSet set;
  FaultSpec s = spec(FaultKind::error_entry, 1.0, 1);
  s.error_code = -240;
  s.error_message = "Hardware error";
  set.arm(s);
  auto entries = set.on_message();
  ASSERT_EQ(entries.size(), 1u);
  EXPECT_EQ(entries[0].code, -240);
  set.disarm(FaultKind::error_entry);
  EXPECT_TRUE(set.on_message().empty());
  EXPECT_TRUE(set.empty());
}

TEST(FaultSet, FaultKindNamesRoundTrip) {
  for (auto k : {FaultKind::no_reply, FaultKind::slow_reply, FaultKind::drop, FaultKind::garble,
                 FaultKind::error_entry, FaultKind::wrong_identity}) {
    EXPECT_EQ(parse_fault_kind(to_string(k)), k);
  }
  EXPECT_FALSE(parse_fault_kind("explode").has_value());
}

// ---- as a client sees them -------------------------------------------------------------

class FaultsOverTheWire : public ::testing::Test {
 protected:
  void SetUp() override {
    sim_.emplace(std::vector<std::string>{"--config", repo_file("config/sim/instant.jsonc").string(), "--log-file",
                                          (dir_ / "sim.log").string()});
    ASSERT_TRUE(sim_->ok());
  }
  json arm(const std::string& role, const std::string& kind, json extra = json::object()) {
    json req{{"cmd", "fault"}, {"role", role}, {"kind", kind}, {"probability", 1.0}, {"seed", 1}};
    req.update(extra);
    json r = sim_->control(req);
    EXPECT_TRUE(r.value("ok", false)) << r.dump();
    return r;
  }
  std::unique_ptr<drivers::ScpiSession> session(const std::string& key, int timeout_ms = 2000) {
    drivers::SessionOptions o;
    o.timeout = std::chrono::milliseconds(timeout_ms);
    return sim_->session(key, o);
  }
  TempDir dir_;
  std::optional<RunningSim> sim_;
};

TEST_F(FaultsOverTheWire, NoReplyIsATimeout) {
  arm("source", "no-reply");
  auto s = session("source/tcp", 300);
  auto r = s->query("FREQ?");
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.error().kind, ErrorKind::timeout) << r.error().message;
}

TEST_F(FaultsOverTheWire, DropClosesTheConnection) {
  arm("receiver", "drop");
  auto s = session("receiver/tcp");
  auto r = s->query("*IDN?");
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.error().kind, ErrorKind::closed) << r.error().message;
}

TEST_F(FaultsOverTheWire, GarbleIsAProtocolErrorOrAWrongValue) {
  auto s = session("source/tcp");
  ASSERT_TRUE(s->write("FREQ 915 MHZ").ok());
  arm("source", "garble");
  auto r = s->query_number("FREQ?");
  if (r.ok()) {
    EXPECT_NE(r.value(), 915e6) << "a garbled reply must not read as the true value";
  } else {
    EXPECT_EQ(r.error().kind, ErrorKind::protocol) << r.error().message;
  }
}

TEST_F(FaultsOverTheWire, ErrorEntryIsWhatDrainErrorsReturns) {
  arm("source", "error-entry", {{"error_code", -240}, {"error_message", "Hardware error"}});
  auto s = session("source/tcp");
  ASSERT_TRUE(s->write("FREQ 915 MHZ").ok());
  // A query on the same connection makes sure the message above was handled before the
  // faults are cleared over the control connection.
  ASSERT_TRUE(s->query("*OPC?").ok());
  sim_->control({{"cmd", "clear-faults"}, {"role", "source"}});
  Status st = s->drain_errors();
  ASSERT_FALSE(st.ok());
  EXPECT_EQ(st.error().kind, ErrorKind::instrument);
  EXPECT_EQ(st.error().instrument_code, -240) << st.error().message;
}

TEST_F(FaultsOverTheWire, WrongIdentityDiffersFromTheRealOne) {
  auto s = session("receiver/tcp");
  auto real = s->identify();
  ASSERT_TRUE(real.ok()) << real.error().message;
  arm("receiver", "wrong-identity");
  auto wrong = s->identify();
  ASSERT_TRUE(wrong.ok()) << wrong.error().message;
  EXPECT_NE(wrong->manufacturer + "," + wrong->model, real->manufacturer + "," + real->model);
  // Other replies are untouched.
  EXPECT_TRUE(s->query_number("*OPC?").ok());
}

TEST_F(FaultsOverTheWire, SlowReplyStillAnswers) {
  arm("source", "slow-reply", {{"delay_ms", 150}});
  auto s = session("source/tcp");
  auto idn = s->identify();
  ASSERT_TRUE(idn.ok()) << idn.error().message;
  EXPECT_EQ(idn->model, "SIM-SRC");
}

TEST_F(FaultsOverTheWire, SlowReplyLongerThanTheClientTimeoutIsATimeout) {
  arm("source", "slow-reply", {{"delay_ms", 1500}});
  auto s = session("source/tcp", 300);
  auto r = s->query("*IDN?");
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.error().kind, ErrorKind::timeout);
}

TEST_F(FaultsOverTheWire, ClearFaultsRestoresNormalService) {
  arm("source", "no-reply");
  json r = sim_->control({{"cmd", "clear-faults"}});
  EXPECT_TRUE(r.value("ok", false));
  auto s = session("source/tcp");
  EXPECT_TRUE(s->identify().ok());
}

TEST_F(FaultsOverTheWire, SeededHalfProbabilityIsReproducibleAcrossRuns) {
  // The same seed gives the same pattern of lost replies on a fresh connection's worth of
  // queries, run twice (re-arming reseeds the generator).
  auto pattern = [&]() {
    arm("source", "no-reply", {{"probability", 0.5}, {"seed", 77}});
    std::string out;
    for (int i = 0; i < 12; ++i) {
      auto s = session("source/tcp", 150);
      out += s->query("*IDN?").ok() ? '1' : '0';
    }
    return out;
  };
  const std::string a = pattern();
  const std::string b = pattern();
  EXPECT_EQ(a, b);
  EXPECT_NE(a.find('0'), std::string::npos);
  EXPECT_NE(a.find('1'), std::string::npos);
}

TEST_F(FaultsOverTheWire, StatusCountsFiredFaults) {
  arm("source", "garble");
  auto s = session("source/tcp");
  (void)s->query("*IDN?");
  json st = sim_->control({{"cmd", "status"}});
  ASSERT_TRUE(st.value("ok", false)) << st.dump();
  EXPECT_GE(st["instruments"]["source"]["faults_fired"].get<int>(), 1);
  EXPECT_EQ(st["instruments"]["source"]["faults"][0]["kind"], "garble");
}

}  // namespace
}  // namespace echoline::sim::testing
