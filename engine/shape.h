// Shape: the extents of a tensor, rank 0 (a scalar) to kMaxRank, row-major.
//
// A small value type: copying is cheap and it never allocates.
// Thread safety: a value type; concurrent reads are safe.
#pragma once

#include <array>
#include <cstdint>
#include <initializer_list>
#include <string>

namespace spar {

constexpr int kMaxRank = 6;

class Shape {
 public:
  Shape() = default;  // rank 0: a scalar with one element
  Shape(std::initializer_list<int64_t> dims);
  template <class It>
  Shape(It first, It last) {
    for (; first != last; ++first) push_back(static_cast<int64_t>(*first));
  }

  int rank() const { return rank_; }
  int64_t operator[](int axis) const { return dims_[axis]; }
  int64_t& operator[](int axis) { return dims_[axis]; }
  int64_t numel() const;
  const int64_t* begin() const { return dims_.data(); }
  const int64_t* end() const { return dims_.data() + rank_; }

  void push_back(int64_t extent);  // raises kBadShape past kMaxRank or for extent < 0

  // The same shape with `axis` removed, or with its extent set to `extent`.
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
