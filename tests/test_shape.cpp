// Shape's element-count invariant (engine/shape.h) and the pool's allocation limit
// (engine/buffer_pool.h): the guards every reader of outside sizes relies on.
#include <catch2/catch.hpp>

#include "engine/buffer_pool.h"
#include "engine/shape.h"
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

}  // namespace
}  // namespace spar
