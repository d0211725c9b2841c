// Replay driver: runs every file of the given files and folders (recursively, sorted) through a
// fuzz target's LLVMFuzzerTestOneInput once, so the seed corpus and the saved crash
// regressions run under the normal g++ build and ctest without libFuzzer. Single-threaded.
// Usage: <target>_replay [-v] <file|folder>...   exit 0 when every input ran; 1 on bad usage
// or when no input was found (a replay that ran nothing must not pass).
#include <algorithm>
#include <csignal>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include <unistd.h>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size);

namespace {

// The input being run, for the crash message (read from a signal handler: plain char buffer).
char g_current[4096] = "";

extern "C" void on_fatal_signal(int sig) {
  const char prefix[] = "replay: crashed on input ";
  (void)!write(2, prefix, sizeof prefix - 1);
  (void)!write(2, g_current, std::strlen(g_current));
  (void)!write(2, "\n", 1);
  std::signal(sig, SIG_DFL);
  std::raise(sig);
}

std::vector<std::filesystem::path> collect(const std::vector<std::string>& args) {
  std::vector<std::filesystem::path> files;
  for (const auto& a : args) {
    std::error_code ec;
    if (std::filesystem::is_directory(a, ec)) {
      for (const auto& e : std::filesystem::recursive_directory_iterator(a, ec))
        if (e.is_regular_file()) files.push_back(e.path());
    } else if (std::filesystem::is_regular_file(a, ec)) {
      files.emplace_back(a);
    } else {
      std::fprintf(stderr, "replay: %s: no such file or folder\n", a.c_str());
    }
  }
  std::sort(files.begin(), files.end());
  return files;
}

}  // namespace


int main(int argc, char** argv) {
  bool verbose = false;
  std::vector<std::string> args;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "-v") == 0) verbose = true;
    else args.emplace_back(argv[i]);
  }
  if (args.empty()) {
    std::fprintf(stderr, "usage: %s [-v] <file|folder>...\n", argv[0]);
    return 1;
  }
  for (int sig : {SIGABRT, SIGSEGV, SIGBUS, SIGFPE, SIGILL}) std::signal(sig, on_fatal_signal);

  const auto files = collect(args);
  if (files.empty()) {
    std::fprintf(stderr, "replay: no input files found\n");
    return 1;
  }
  std::size_t total_bytes = 0;
  for (const auto& f : files) {
    std::ifstream in(f, std::ios::binary);
    if (!in) {
      std::fprintf(stderr, "replay: %s: cannot read\n", f.c_str());
      return 1;
    }
    std::vector<char> bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    std::snprintf(g_current, sizeof g_current, "%s", f.c_str());
    if (verbose) std::fprintf(stderr, "replay: %s (%zu bytes)\n", f.c_str(), bytes.size());
    LLVMFuzzerTestOneInput(reinterpret_cast<const std::uint8_t*>(bytes.data()), bytes.size());
    total_bytes += bytes.size();
  }
  std::printf("replay: %zu inputs (%zu bytes) ran without a finding\n", files.size(), total_bytes);
  return 0;
}
