#include "engine/shape.h"

#include <algorithm>

#include "engine/error.h"

namespace spar {

int64_t checked_element_count(const int64_t* extents, size_t count) {
  int64_t product = 1;  // of the non-zero extents
  bool empty = false;
  for (size_t i = 0; i < count; ++i) {
    const int64_t e = extents[i];
    if (e < 0) return -1;
    if (e == 0) {
      empty = true;
      continue;
    }
    if (product > kMaxElements / e) return -1;
    product *= e;
  }
  return empty ? 0 : product;
}

Shape::Shape(std::initializer_list<int64_t> dims) {
  for (int64_t d : dims) push_back(d);
}

void Shape::push_back(int64_t extent) {
  if (rank_ == kMaxRank)
    raise(ErrorKind::kBadShape, "shape: rank above the maximum of " + std::to_string(kMaxRank));
  if (extent < 0) raise(ErrorKind::kBadShape, "shape: negative extent " + std::to_string(extent));
  dims_[rank_] = extent;
  if (checked_element_count(dims_.data(), static_cast<size_t>(rank_ + 1)) < 0)
    raise(ErrorKind::kBadShape, "shape: " + Shape(dims_.begin(), dims_.begin() + rank_).str() +
                                    " extended by " + std::to_string(extent) + " has more than " +
                                    std::to_string(kMaxElements) + " elements");
  ++rank_;
}

int64_t Shape::element_count() const {
  int64_t n = 1;  // cannot overflow: push_back keeps the count within kMaxElements
  for (int i = 0; i < rank_; ++i) n *= dims_[i];
  return n;
}

Shape Shape::without(int axis) const {
  SPAR_ASSERT(axis >= 0 && axis < rank_, "Shape::without: axis out of range");
  Shape s;
  for (int i = 0; i < rank_; ++i)
    if (i != axis) s.push_back(dims_[i]);
  return s;
}

Shape Shape::with(int axis, int64_t extent) const {
  SPAR_ASSERT(axis >= 0 && axis < rank_, "Shape::with: axis out of range");
  Shape s;
  for (int i = 0; i < rank_; ++i) s.push_back(i == axis ? extent : dims_[i]);
  return s;
}

int Shape::normalise_axis(int axis, const char* op) const {
  int a = axis < 0 ? axis + rank_ : axis;
  if (a < 0 || a >= rank_)
    raise(ErrorKind::kBadShape,
          std::string(op) + ": axis " + std::to_string(axis) + " out of range for shape " + str());
  return a;
}

std::string Shape::str() const {
  std::string s = "[";
  for (int i = 0; i < rank_; ++i) {
    if (i) s += ", ";
    s += std::to_string(dims_[i]);
  }
  return s + "]";
}

bool operator==(const Shape& a, const Shape& b) {
  return a.rank_ == b.rank_ && std::equal(a.begin(), a.end(), b.begin());
}

Shape broadcast_shapes(const Shape& a, const Shape& b, const char* op) {
  int rank = std::max(a.rank(), b.rank());
  Shape out;
  for (int i = 0; i < rank; ++i) {
    int ia = i - (rank - a.rank()), ib = i - (rank - b.rank());
    int64_t da = ia >= 0 ? a[ia] : 1, db = ib >= 0 ? b[ib] : 1;
    if (da != db && da != 1 && db != 1)
      raise(ErrorKind::kBadShape,
            std::string(op) + ": shapes " + a.str() + " and " + b.str() + " do not broadcast");
    out.push_back(da == 1 ? db : da);
  }
  return out;
}

}  // namespace spar
