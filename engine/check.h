// SPAR_ASSERT(condition, "message"): the check for programmer errors (an index out of range, a
// broken precondition of an internal function), as opposed to spar::raise (error.h) for what a
// user can fix (a bad shape, file, recipe or value).
//
// Without NDEBUG (the sanitizer build, scripts/test --sanitize) a false condition prints
//   <file>:<line>: SPAR_ASSERT(<condition>) failed: <message>
// to stderr and aborts. With NDEBUG (the Release build) the check is compiled out: the
// condition is not evaluated, only type-checked. Like <cassert>, this header may be included
// again after NDEBUG was defined or undefined, and SPAR_ASSERT then follows the new setting
// (tests/test_shape.cpp uses that to test the macro in any build).
//
// Thread safety: the failure report may come from any thread; it ends the process.
#ifndef SPAR_ENGINE_CHECK_H
#define SPAR_ENGINE_CHECK_H

namespace spar {
namespace detail {
// Prints the report described above and calls std::abort().
[[noreturn]] void assertion_failed(const char* file, int line, const char* condition,
                                   const char* message) noexcept;
}  // namespace detail
}  // namespace spar

#endif  // SPAR_ENGINE_CHECK_H

#undef SPAR_ASSERT
#ifdef NDEBUG
#define SPAR_ASSERT(condition, message) static_cast<void>(sizeof(static_cast<bool>(condition)))
#else
#define SPAR_ASSERT(condition, message) \
  (static_cast<bool>(condition)         \
       ? static_cast<void>(0)           \
       : ::spar::detail::assertion_failed(__FILE__, __LINE__, #condition, message))
#endif
