// Who may reach the daemon's API (daemon/service/API.md, "Roles and authentication"): the Unix
// socket's file mode keeps other users out, TCP is loopback-only unless configured, a
// non-loopback listener needs the station token, a wrong token gets nothing, and the operator
// role cannot make engineer calls. Each test tries to get in without the right and expects
// to be refused. A real echolined on real sockets; no instruments are needed for these calls.
#include <arpa/inet.h>
#include <ifaddrs.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/un.h>
#include <grp.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <fstream>
#include <optional>
#include <string>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "daemon/client/api_client.hpp"
#include "daemon/client/line_connection.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::testing;
using nlohmann::json;
namespace fs = std::filesystem;

constexpr const char* kToken = "access-test-token-5f1c9a7e3b2d4e6f";   // >= 16 characters

// The first IPv4 address of this host that is not loopback ("" when there is none).
std::string non_loopback_ipv4() {
  ifaddrs* list = nullptr;
  if (getifaddrs(&list) != 0) return "";
  std::string found;
  for (ifaddrs* i = list; i != nullptr && found.empty(); i = i->ifa_next) {
    if (i->ifa_addr == nullptr || i->ifa_addr->sa_family != AF_INET) continue;
    const auto* in = reinterpret_cast<const sockaddr_in*>(i->ifa_addr);
    if ((ntohl(in->sin_addr.s_addr) >> 24) == 127) continue;
    char text[INET_ADDRSTRLEN] = {};
    inet_ntop(AF_INET, &in->sin_addr, text, sizeof text);
    found = text;
  }
  freeifaddrs(list);
  return found;
}

int free_tcp_port(const std::string& host) {
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  inet_pton(AF_INET, host.c_str(), &a.sin_addr);
  ::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a);
  socklen_t len = sizeof a;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
  ::close(fd);
  return ntohs(a.sin_port);
}

// A daemon with a station config of our own; instruments point at a closed port (the calls
// under test never touch them).
class Daemon {
 public:
  // api: the station config's "api" object (paths relative to the temp folder are made absolute).
  explicit Daemon(json api, std::vector<std::string> extra_args = {}) : dir_("echoline-access") {
    // Everyone may traverse the folder, so only the socket's own mode decides who connects.
    fs::permissions(dir_.path(), fs::perms::owner_all | fs::perms::group_read | fs::perms::group_exec |
                                     fs::perms::others_read | fs::perms::others_exec);
    std::ofstream(dir_ / "token") << kToken << "\n";
    api["unix_socket"] = (dir_ / "api.sock").string();
    if (api.contains("token_file")) api["token_file"] = (dir_ / "token").string();
    const fs::path src = source_dir();
    json station = {
        {"station", "access-bench"},
        {"data_dir", (dir_ / "data").string()},
        {"recipe", (src / "config/recipes/whip915.jsonc").string()},
        {"instruments",
         {{{"role", "source"}, {"name", "siggen"}, {"address", "tcp://127.0.0.1:9"},
           {"profile", (src / "config/instruments/sim-source.jsonc").string()}},
          {{"role", "receiver"}, {"name", "analyzer"}, {"address", "tcp://127.0.0.1:9"},
           {"profile", (src / "config/instruments/sim-receiver.jsonc").string()}}}},
        {"api", api}};
    std::ofstream(dir_ / "station.jsonc") << station.dump(2);
    std::vector<std::string> argv = {daemon_binary().string(), "--config", (dir_ / "station.jsonc").string(),
                                     "--log-level", "warn"};
    argv.insert(argv.end(), extra_args.begin(), extra_args.end());
    ChildProcess::Options o;
    o.merge_stderr = true;
    process_.emplace(ChildProcess::start(argv, o));
    if (auto line = process_->wait_for_line("listening", std::chrono::seconds(60))) {
      auto f = parse_fields(*line);
      unix_path_ = f["unix"];
      tcp_ = f["tcp"];
    }
  }
  ~Daemon() {
    if (process_ && process_->running()) process_->terminate(std::chrono::seconds(10));
  }
  bool listening() const { return !unix_path_.empty(); }
  const std::string& unix_path() const { return unix_path_; }
  const std::string& tcp() const { return tcp_; }   // "host:port", "" when none
  int tcp_port() const { return std::stoi(tcp_.substr(tcp_.rfind(':') + 1)); }
  ChildProcess& process() { return *process_; }
  const fs::path& dir() const { return dir_.path(); }

 private:
  TempDir dir_;
  std::optional<ChildProcess> process_;
  std::string unix_path_, tcp_;
};

std::unique_ptr<client::ApiClient> connect(const std::string& address) {
  auto c = client::LineConnection::connect_address(address, client::Millis{5000});
  if (!c) {
    ADD_FAILURE() << address << ": " << c.error().message;
    return nullptr;
  }
  return std::make_unique<client::ApiClient>(std::move(c.value()));
}

// The API error code of a call ("" when it succeeded).
std::string refusal_of(client::ApiClient& api, const std::string& call, const json& args = json::object()) {
  auto r = api.call(call, args, client::Millis{30000});
  if (!r) return "transport: " + r.error().message;
  return r->ok ? "" : r->code;
}

// Tries to connect to a Unix socket as another user (a forked child drops to uid/gid) and
// returns the errno of connect() (0 = connected).
int connect_as(const std::string& path, uid_t uid, gid_t gid) {
  sockaddr_un addr{};
  addr.sun_family = AF_UNIX;
  std::snprintf(addr.sun_path, sizeof addr.sun_path, "%s", path.c_str());
  const pid_t pid = fork();
  if (pid == 0) {
    if (setgroups(0, nullptr) != 0 || setgid(gid) != 0 || setuid(uid) != 0) _exit(200);
    const int fd = ::socket(AF_UNIX, SOCK_STREAM, 0);
    if (fd < 0) _exit(201);
    const int rc = ::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof addr);
    _exit(rc == 0 ? 0 : (errno & 0x7f));
  }
  int status = 0;
  waitpid(pid, &status, 0);
  return WIFEXITED(status) ? WEXITSTATUS(status) : 255;
}

constexpr uid_t kNobody = 65534;   // Debian's "nobody" / "nogroup" (base-passwd), from memory

// ---- Unix socket ----

TEST(AccessUnixSocket, SocketFileHasTheDocumentedMode) {
  Daemon d(json::object());
  ASSERT_TRUE(d.listening()) << "daemon did not start";
  struct stat st {};
  ASSERT_EQ(::stat(d.unix_path().c_str(), &st), 0);
  EXPECT_TRUE(S_ISSOCK(st.st_mode));
  // API.md: "listens on a Unix socket (path api.unix_socket in the station config, mode 0660)".
  EXPECT_EQ(st.st_mode & 0777, 0660u);
}

TEST(AccessUnixSocket, AnotherUserIsRefusedByTheFileMode) {
  if (::geteuid() != 0) GTEST_SKIP() << "needs root to act as another user";
  Daemon d(json::object());
  ASSERT_TRUE(d.listening());
  // nobody:nogroup is neither the owner (root) nor in the group (root): mode 0660 gives
  // "others" nothing, so connect() fails with EACCES (connect(2): write permission denied
  // on the socket file).
  EXPECT_EQ(connect_as(d.unix_path(), kNobody, kNobody), EACCES);
  // Control: the same uid in the socket's group gets in, so the refusal above is the mode's.
  EXPECT_EQ(connect_as(d.unix_path(), kNobody, 0), 0);
}

// A token file others may read gives the engineer role to every account on the computer: the
// daemon still serves but warns at start, naming the file and the fix (common practice, no source:
// secrets readable by their owner alone).
TEST(AccessToken, AFileOthersMayReadIsWarnedAbout) {
  const mode_t before = ::umask(022);   // the token file is written 0644: group and others may read
  Daemon d(json{{"token_file", "token"}});
  ::umask(before);
  ASSERT_TRUE(d.listening());
  ASSERT_NE(fs::status(d.dir() / "token").permissions() & (fs::perms::group_read | fs::perms::others_read),
            fs::perms::none);
  bool warned = false;
  for (const auto& l : d.process().output_lines()) {
    warned |= l.find("may be read by group or others") != std::string::npos && l.find("chmod 600") != std::string::npos;
  }
  EXPECT_TRUE(warned);
}

TEST(AccessUnixSocket, OperatorCannotMakeEngineerCalls) {
  Daemon d(json{{"token_file", "token"}});
  ASSERT_TRUE(d.listening());
  auto api = connect(d.unix_path());
  ASSERT_TRUE(api);
  // API.md: Unix socket connections start as operator; recipe.select, report.lot and export
  // need the engineer role.
  EXPECT_EQ(refusal_of(*api, "recipe.select", {{"path", (source_dir() / "config/recipes/whip915.jsonc").string()}}),
            "forbidden");
  EXPECT_EQ(refusal_of(*api, "report.lot", {{"lot", "L"}, {"path", (d.dir() / "r.html").string()}}), "forbidden");
  EXPECT_EQ(refusal_of(*api, "export", {{"scope", "lot"}, {"key", "L"}, {"format", "csv"}, {"path", (d.dir() / "x.csv").string()}}),
            "forbidden");
  EXPECT_FALSE(fs::exists(d.dir() / "r.html"));
  EXPECT_FALSE(fs::exists(d.dir() / "x.csv"));
  EXPECT_EQ(refusal_of(*api, "status"), "");   // the operator's own calls work
}

TEST(AccessUnixSocket, EngineerRoleNeedsTheToken) {
  Daemon d(json{{"token_file", "token"}});
  ASSERT_TRUE(d.listening());
  auto api = connect(d.unix_path());
  ASSERT_TRUE(api);
  const json recipe = {{"path", (source_dir() / "config/recipes/whip915.jsonc").string()}};
  EXPECT_EQ(refusal_of(*api, "hello", {{"role", "engineer"}}), "unauthorized");   // no token
  EXPECT_EQ(refusal_of(*api, "hello", {{"role", "engineer"}, {"token", "access-test-token-5f1c9a7e3b2d4e60"}}),
            "unauthorized");   // one character off
  EXPECT_EQ(refusal_of(*api, "hello", {{"role", "engineer"}, {"token", std::string(kToken) + "x"}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api, "recipe.select", recipe), "forbidden");   // still an operator
  // Control: the right token makes the same connection an engineer.
  EXPECT_EQ(refusal_of(*api, "hello", {{"role", "engineer"}, {"token", kToken}}), "");
  EXPECT_NE(refusal_of(*api, "recipe.select", recipe), "forbidden");
}

// ---- TCP ----

TEST(AccessTcp, DefaultListenerIsLoopbackOnly) {
  // No tcp_host in the config: 127.0.0.1 (config/README.md). --tcp-port auto picks a free port.
  Daemon d(json::object(), {"--tcp-port", "auto"});
  ASSERT_TRUE(d.listening());
  ASSERT_EQ(d.tcp().rfind("127.0.0.1:", 0), 0u) << d.tcp();
  auto api = connect("tcp://" + d.tcp());
  ASSERT_TRUE(api);
  EXPECT_EQ(refusal_of(*api, "status"), "");   // loopback TCP starts as operator (API.md)
  const std::string ip = non_loopback_ipv4();
  if (ip.empty()) GTEST_SKIP() << "this host has no non-loopback IPv4 address to try";
  auto other = client::LineConnection::connect_tcp(ip, d.tcp_port(), client::Millis{3000});
  EXPECT_FALSE(other.ok()) << "the loopback-only listener answered on " << ip;
}

TEST(AccessTcp, NonLoopbackListenerWithoutTokenIsRefusedAtStart) {
  const std::string ip = non_loopback_ipv4();
  if (ip.empty()) GTEST_SKIP() << "this host has no non-loopback IPv4 address to bind";
  Daemon d(json{{"tcp_host", ip}, {"tcp_port", free_tcp_port(ip)}});
  EXPECT_FALSE(d.listening()) << "the daemon listened on " << ip << " with no token file";
  auto code = d.process().wait(std::chrono::seconds(30));
  ASSERT_TRUE(code.has_value()) << "the daemon kept running";
  EXPECT_NE(*code, 0);
  bool named = false;
  for (const auto& l : d.process().output_lines()) named |= l.find("token_file") != std::string::npos;
  EXPECT_TRUE(named) << "the refusal should name api.token_file";
}

class AccessRemote : public ::testing::Test {
 protected:
  void SetUp() override {
    ip_ = non_loopback_ipv4();
    if (ip_.empty()) GTEST_SKIP() << "this host has no non-loopback IPv4 address to bind";
    daemon_.emplace(json{{"tcp_host", ip_}, {"token_file", "token"}}, std::vector<std::string>{"--tcp-port", "auto"});
    ASSERT_TRUE(daemon_->listening());
    ASSERT_EQ(daemon_->tcp().rfind(ip_ + ":", 0), 0u) << daemon_->tcp();
    // Connecting to our own non-loopback address: the daemon sees a non-loopback peer.
    api_ = connect("tcp://" + daemon_->tcp());
    ASSERT_TRUE(api_);
  }
  std::string ip_;
  std::optional<Daemon> daemon_;
  std::unique_ptr<client::ApiClient> api_;
};

TEST_F(AccessRemote, EveryCallBeforeHelloIsUnauthorized) {
  // API.md: a non-loopback TCP connection starts unauthenticated; every call but hello is refused.
  EXPECT_EQ(refusal_of(*api_, "status"), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "runs.lot", {{"lot", "L"}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "test.start", {{"serial", "SOAK915-00001"}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "cal.start"), "unauthorized");
}

TEST_F(AccessRemote, HelloWithoutOrWithAWrongTokenGetsNothing) {
  EXPECT_EQ(refusal_of(*api_, "hello", {{"role", "operator"}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "hello", {{"role", "operator"}, {"token", "not-the-station-token-at-all"}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "hello", {{"role", "operator"}, {"token", ""}}), "unauthorized");
  EXPECT_EQ(refusal_of(*api_, "status"), "unauthorized");   // a failed hello leaves it locked
}

TEST_F(AccessRemote, TheRightTokenAdmitsAnOperator) {
  // Control for the two tests above: with the token the same listener serves.
  EXPECT_EQ(refusal_of(*api_, "hello", {{"role", "operator"}, {"token", kToken}}), "");
  EXPECT_EQ(refusal_of(*api_, "status"), "");
  EXPECT_EQ(refusal_of(*api_, "export", {{"scope", "lot"}, {"key", "L"}, {"format", "csv"}, {"path", "/tmp/x.csv"}}),
            "forbidden");   // an operator still, not an engineer
}

}  // namespace
