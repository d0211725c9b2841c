// Fault injection for tests of the daemon as a whole process, compiled in only when the build
// has ECHOLINE_TEST_HOOKS (on by default in builds with tests; off in scripts/package, so an
// installed daemon has none). Each hook reads its environment variable once.
// Threading: safe from any thread.
#pragma once

namespace echoline::service::test_hooks {

// TEST ONLY. With $ECHOLINE_TEST_HANG_AT_POINT=N, the sweep engine's thread blocks for good
// after measuring point N (1-based) of a step sweep, with the source's RF output ON and no
// reaction to cancellation: a stand-in for an engine that stops making progress, for the
// watchdog test. Does nothing otherwise, and nothing at all in builds without test hooks.
void hang_after_point(int point);

}  // namespace echoline::service::test_hooks
