#include "engine/check.h"

#include <cstdio>
#include <cstdlib>

namespace spar {
namespace detail {

void assertion_failed(const char* file, int line, const char* condition,
                      const char* message) noexcept {
  std::fprintf(stderr, "%s:%d: SPAR_ASSERT(%s) failed: %s\n", file, line, condition, message);
  std::fflush(stderr);
  std::abort();
}

}  // namespace detail
}  // namespace spar
