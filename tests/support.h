// Helpers shared by the tests.
#pragma once

#include <catch2/catch.hpp>
#include <cstring>
#include <functional>
#include <string>

#include "engine/error.h"
#include "engine/tensor.h"

namespace spar {
namespace testing {

// The kind of spar::Error that `fn` raises (its message into *message when given). Any
// other exception (std::bad_alloc from an absurd allocation, say) or none at all fails.
inline ErrorKind error_kind_of(const std::function<void()>& fn, std::string* message = nullptr) {
  try {
    fn();
  } catch (const Error& e) {
    if (message) *message = e.what();
    return e.kind();
  } catch (const std::exception& e) {
    FAIL("expected spar::Error, got std::exception: " << e.what());
  }
  FAIL("expected spar::Error, nothing was raised");
  return ErrorKind::kIo;  // not reached
}

// Equal shapes and identical bytes (so NaN payloads and -0.0 count).
template <class T>
bool same_bits(const Tensor<T>& a, const Tensor<T>& b) {
  return a.shape() == b.shape() &&
         std::memcmp(a.data(), b.data(), static_cast<size_t>(a.numel()) * sizeof(T)) == 0;
}

}  // namespace testing
}  // namespace spar
