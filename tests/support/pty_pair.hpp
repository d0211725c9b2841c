// Test support: a pseudo-terminal pair made for one test (posix_openpt/grantpt/unlockpt).
// The test plays the instrument on the master fd; the code under test opens slave_path().
// Owns both fds; not copyable; one test thread.
#pragma once

#include <chrono>
#include <string>
#include <string_view>

namespace echoline::testing {

class PtyPair {
 public:
  // Creates the pair and puts the slave in raw mode (no echo). Throws std::runtime_error on failure.
  PtyPair();
  PtyPair(const PtyPair&) = delete;
  PtyPair& operator=(const PtyPair&) = delete;
  ~PtyPair();

  int master_fd() const { return master_; }
  const std::string& slave_path() const { return slave_path_; }
  // An fd on the slave the pair keeps open (for tcgetattr: termios settings belong to the tty).
  int slave_fd() const { return slave_hold_; }

  // Writes all bytes to the master (the instrument side). Returns false on error.
  bool write(std::string_view bytes);
  // Reads from the master until `terminator` (kept in the result) or the timeout; returns what arrived.
  std::string read_until(char terminator, std::chrono::milliseconds timeout);
  // Reads from the master for up to `timeout`, returning whatever arrived.
  std::string read_for(std::chrono::milliseconds timeout);
  // Closes the master: the slave side sees a hang-up.
  void close_master();

 private:
  int master_ = -1;
  int slave_hold_ = -1;   // keeps the slave open so master reads do not fail with EIO between opens
  std::string slave_path_;
};

}  // namespace echoline::testing
