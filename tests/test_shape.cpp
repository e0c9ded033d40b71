// Shape's element-count invariant (engine/shape.h) and the pool's allocation limit
// (engine/buffer_pool.h): the guards every reader of outside sizes relies on. And the guard
// for programmer errors, SPAR_ASSERT (engine/check.h): that it reports and aborts (SIGABRT, as
// POSIX defines abort()), and that Shape, Tensor and the tape use it.
#include <sys/wait.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <csignal>
#include <cstdio>
#include <functional>
#include <string>

#include "engine/buffer_pool.h"
#include "engine/shape.h"
#include "engine/tape_detail.h"  // TapeAccess::node, to ask the tape for a node it lacks
#include "engine/tensor.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;

TEST_CASE("checked_element_count: products, zeros and overflow", "[shape]") {
  const int64_t big = int64_t{1} << 62;
  const int64_t fits[] = {1 << 24, 1 << 24};  // exactly kMaxElements
  CHECK(checked_element_count(fits, 2) == kMaxElements);
  const int64_t past[] = {(1 << 24) + 1, 1 << 24};
  CHECK(checked_element_count(past, 2) == -1);
  const int64_t with_zero[] = {60000, 0, 28};
  CHECK(checked_element_count(with_zero, 3) == 0);
  // A zero does not excuse absurd others (a crafted archive declared [2^62, 2, 0]).
  const int64_t absurd_zero[] = {big, 2, 0};
  CHECK(checked_element_count(absurd_zero, 3) == -1);
  // Products that wrap around 2^64 to a small number are caught, not wrapped.
  const int64_t wraps[] = {big, 4};
  CHECK(checked_element_count(wraps, 2) == -1);
  const int64_t negative[] = {3, -1};
  CHECK(checked_element_count(negative, 2) == -1);
  CHECK(checked_element_count(nullptr, 0) == 1);  // a scalar
}

TEST_CASE("Shape keeps its element count within kMaxElements", "[shape]") {
  CHECK(Shape{1 << 24, 1 << 24}.element_count() == kMaxElements);
  std::string message;
  CHECK(error_kind_of([] { Shape{int64_t{1} << 62, 2, 0}; }, &message) == ErrorKind::kBadShape);
  CHECK(message.find("elements") != std::string::npos);
  CHECK(error_kind_of([] { Shape{1 << 24, (1 << 24) + 1}; }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] {
          Shape{1 << 24, 1 << 24}.with(0, (1 << 24) + 1);
        }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] { Shape{2, 3}.with(1, -1); }) == ErrorKind::kBadShape);
  CHECK(Shape{2, 3}.with(1, 5) == Shape{2, 5});
}

TEST_CASE("PoolLimit refuses the first block past its budget, then lifts", "[shape]") {
  const Tensor<float> kept = Tensor<float>::zeros({1024});  // in use before the limit
  {
    PoolLimit limit(int64_t{1} << 20, ErrorKind::kCorruptCheckpoint, "too big for its file");
    const Tensor<float> small = Tensor<float>::zeros({1000});  // 4 KB: fine
    std::string message;
    CHECK(error_kind_of([] { Tensor<float>::zeros({1 << 20}); }, &message) ==
          ErrorKind::kCorruptCheckpoint);  // 4 MiB
    CHECK(message == "too big for its file");
    CHECK(small.element_count() == 1000);
  }
  CHECK(Tensor<float>::zeros({1 << 20}).element_count() == 1 << 20);  // no limit any more
  CHECK(kept.element_count() == 1024);
}

// How a child process that ran `body` ended, and what it wrote to stderr.
struct ChildEnd {
  bool aborted = false;  // killed by SIGABRT
  int exit_code = -1;    // when it exited instead
  std::string error_output;
};

ChildEnd run_in_child(const std::function<void()>& body) {
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  std::fflush(nullptr);
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    ::close(fds[0]);
    ::dup2(fds[1], STDERR_FILENO);
    std::signal(SIGABRT, SIG_DFL);  // not Catch's handler, which would report from the child
    try {
      body();
    } catch (...) {
      ::_exit(3);
    }
    ::_exit(0);
  }
  ::close(fds[1]);
  ChildEnd end;
  char buffer[512];
  ssize_t n;
  while ((n = ::read(fds[0], buffer, sizeof buffer)) > 0)
    end.error_output.append(buffer, static_cast<size_t>(n));
  ::close(fds[0]);
  int status = 0;
  REQUIRE(::waitpid(pid, &status, 0) == pid);
  end.aborted = WIFSIGNALED(status) && WTERMSIG(status) == SIGABRT;
  if (WIFEXITED(status)) end.exit_code = WEXITSTATUS(status);
  return end;
}

#ifndef NDEBUG
// `body` aborts through SPAR_ASSERT with `condition` and `message` in its report.
void require_assert(const std::function<void()>& body, const std::string& condition,
                    const std::string& message) {
  const ChildEnd end = run_in_child(body);
  INFO("stderr: " << end.error_output);
  CHECK(end.aborted);
  CHECK(end.error_output.find("SPAR_ASSERT(" + condition + ") failed: " + message) !=
        std::string::npos);
}

// Only in a build with asserts on (the sanitizer build): with NDEBUG these checks are compiled
// out of the engine, and Catch2 2 has no way to report a skipped test, so the test does not
// exist there rather than pass without checking anything. The macro itself is tested below in
// every build.
TEST_CASE("the engine's index preconditions are SPAR_ASSERTs when asserts are on", "[shape]") {
  require_assert(
      [] {
        (void)Shape{2, 3}[2];
      },
      "axis >= 0 && axis < rank_", "Shape: axis out of range");
  require_assert(
      [] {
        (void)Shape{2, 3}[-1];
      },
      "axis >= 0 && axis < rank_", "Shape: axis out of range");
  require_assert(
      [] {
        (void)Shape{2, 3}.with(2, 1);
      },
      "axis >= 0 && axis < rank_", "Shape::with: axis out of range");
  require_assert(
      [] {
        (void)Shape{2, 3}.without(-1);
      },
      "axis >= 0 && axis < rank_", "Shape::without: axis out of range");
  require_assert(
      [] {
        (void)Tensor<float>::zeros({2, 3}).dim(2);
      },
      "axis >= 0 && axis < rank()", "Tensor::dim: axis out of range");
  require_assert(
      [] {
        Tape<double> tape;
        tape.variable(Tensor<double>::scalar(1));
        (void)detail::TapeAccess<double>::node(tape, 1);
      },
      "id >= 0 && id < size_", "Tape: node id outside the current generation");
  // In range, nothing fires.
  const ChildEnd fine = run_in_child([] {
    Tape<double> tape;
    tape.variable(Tensor<double>::scalar(1));
    (void)detail::TapeAccess<double>::node(tape, 0);
    (void)Shape{2, 3}[1];
  });
  CHECK(fine.exit_code == 0);
  CHECK(fine.error_output.empty());
}
#endif

}  // namespace
}  // namespace spar

// ---- SPAR_ASSERT itself, switched on and then off here whatever the build: check.h follows
// NDEBUG each time it is included (like <cassert>). Nothing after this point is library code.
#undef NDEBUG
#include "engine/check.h"

namespace spar {
namespace {

constexpr int kCheckLine = __LINE__ + 2;  // the line of the SPAR_ASSERT in check_three
void check_three(int v) {
  SPAR_ASSERT(v == 3, "v is not three");
}

TEST_CASE("SPAR_ASSERT reports file, line, condition and message on stderr, then aborts",
          "[shape]") {
  const ChildEnd failed = run_in_child([] { check_three(2); });
  CHECK(failed.aborted);
  CHECK(failed.error_output == std::string(__FILE__) + ":" + std::to_string(kCheckLine) +
                                   ": SPAR_ASSERT(v == 3) failed: v is not three\n");
  const ChildEnd passed = run_in_child([] { check_three(3); });
  CHECK_FALSE(passed.aborted);
  CHECK(passed.exit_code == 0);
  CHECK(passed.error_output.empty());
}

}  // namespace
}  // namespace spar

#define NDEBUG
#include "engine/check.h"

namespace spar {
namespace {

int evaluations = 0;
bool counted_false() {
  ++evaluations;
  return false;
}
void compiled_out_check() {
  SPAR_ASSERT(counted_false(), "not evaluated with NDEBUG");
}

TEST_CASE("with NDEBUG, SPAR_ASSERT does not evaluate its condition", "[shape]") {
  compiled_out_check();
  CHECK(evaluations == 0);
  CHECK(counted_false() == false);  // the function itself does count
  CHECK(evaluations == 1);
}

}  // namespace
}  // namespace spar
