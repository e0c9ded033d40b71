// Shape: the extents of a tensor, rank 0 (a scalar) to kMaxRank, row-major.
//
// Invariant: every extent is >= 0 and the product of the non-zero extents is at most
// kMaxElements, so element_count() and element_count() * sizeof(double) never overflow an int64.
// push_back() and with() enforce it; every reader of outside bytes counts elements with
// checked_element_count() before it builds a Shape or allocates.
//
// A small value type: copying is cheap and it never allocates.
// Thread safety: a value type; concurrent reads are safe.
#pragma once

#include <array>
#include <cstdint>
#include <initializer_list>
#include <string>

#include "engine/check.h"

namespace spar {

constexpr int kMaxRank = 6;
// The most elements a tensor may have: 2^48 (a petabyte of float32). Anything larger is a
// corrupt or hostile size; products up to it times 8 bytes stay far inside an int64.
constexpr int64_t kMaxElements = int64_t{1} << 48;

// The number of elements of a tensor with these `count` extents, or -1 when an extent is
// negative or the product of the non-zero extents exceeds kMaxElements. A zero extent makes
// the count 0 (but the other extents must still be in range). The one overflow-checked
// element count: Shape, the archive reader, the IDX reader and the generator loader use it.
int64_t checked_element_count(const int64_t* extents, size_t count);

class Shape {
 public:
  Shape() = default;  // rank 0: a scalar with one element
  Shape(std::initializer_list<int64_t> dims);
  template <class It>
  Shape(It first, It last) {
    for (; first != last; ++first) push_back(static_cast<int64_t>(*first));
  }

  int rank() const { return rank_; }
  // The extent of axis 0..rank-1 (SPAR_ASSERT, check.h; normalise_axis for axes from outside).
  int64_t operator[](int axis) const {
    SPAR_ASSERT(axis >= 0 && axis < rank_, "Shape: axis out of range");
    return dims_[axis];
  }
  int64_t element_count() const;
  const int64_t* begin() const { return dims_.data(); }
  const int64_t* end() const { return dims_.data() + rank_; }

  // Raises kBadShape past kMaxRank, for extent < 0, or when the element count would exceed
  // kMaxElements.
  void push_back(int64_t extent);

  // The same shape with `axis` (0..rank-1) removed, or with its extent set to `extent`
  // (checked as push_back checks).
  Shape without(int axis) const;
  Shape with(int axis, int64_t extent) const;

  // Converts a possibly negative axis (-1 is the last) to 0..rank-1, raising kBadShape
  // naming `op` when it is out of range.
  int normalise_axis(int axis, const char* op) const;

  std::string str() const;  // "[2, 3]"; "[]" for a scalar

  friend bool operator==(const Shape& a, const Shape& b);
  friend bool operator!=(const Shape& a, const Shape& b) { return !(a == b); }

 private:
  std::array<int64_t, kMaxRank> dims_{};
  int rank_ = 0;
};

// The numpy broadcasting rule: align trailing axes; each pair of extents must be equal or
// one of them 1. Raises kBadShape "<op>: shapes A and B do not broadcast".
Shape broadcast_shapes(const Shape& a, const Shape& b, const char* op);

}  // namespace spar
