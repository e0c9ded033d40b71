// Tensor<T>: a dense, contiguous, row-major array of float (training) or double
// (verification) with a Shape of rank 0 to kMaxRank.
//
// Copies are cheap and share storage (reference counted); clone() makes an independent copy.
// Kernels write only into freshly allocated tensors, so a tensor's contents never change
// behind a reader's back. Mutation is explicit: mutable_data() is for the code that has just
// created the tensor (a kernel, a loader) or owns it outright (an optimiser updating its
// parameters between steps). Storage comes from the buffer pool (buffer_pool.h).
//
// Thread safety: distinct Tensor objects may be used from different threads even when they
// share storage (the reference count is atomic); one Tensor object is not to be written
// from two threads at once.
#pragma once

#include <cstdint>
#include <type_traits>
#include <vector>

#include "engine/buffer_pool.h"
#include "engine/check.h"
#include "engine/shape.h"

namespace spar {

template <class T>
class Tensor {
  static_assert(std::is_same<T, float>::value || std::is_same<T, double>::value,
                "spar::Tensor holds float (training) or double (verification) only");

 public:
  using Scalar = T;

  Tensor() = default;  // no storage: has_value() is false
  Tensor(const Tensor& other);
  Tensor(Tensor&& other) noexcept;
  Tensor& operator=(const Tensor& other);
  Tensor& operator=(Tensor&& other) noexcept;
  ~Tensor();

  // Uninitialised storage: for kernels and loaders that fill every element.
  static Tensor uninitialised(const Shape& shape);
  static Tensor zeros(const Shape& shape);
  static Tensor full(const Shape& shape, T value);
  static Tensor scalar(T value) { return full(Shape{}, value); }
  // Raises kBadShape when values.size() != shape.element_count().
  static Tensor from_values(const Shape& shape, const std::vector<T>& values);

  bool has_value() const { return block_ != nullptr; }
  const Shape& shape() const { return shape_; }
  int rank() const { return shape_.rank(); }
  int64_t dim(int axis) const {  // axis 0..rank-1 (SPAR_ASSERT, check.h)
    SPAR_ASSERT(axis >= 0 && axis < rank(), "Tensor::dim: axis out of range");
    return shape_[axis];
  }
  int64_t element_count() const { return shape_.element_count(); }

  const T* data() const { return data_; }
  T* mutable_data() { return data_; }  // see the class comment for who may write
  T as_scalar() const;                 // the one element; raises kBadShape if element_count() != 1
  T at(std::initializer_list<int64_t> index) const;  // bounds-checked read, for tests
  std::vector<T> to_vector() const { return std::vector<T>(data_, data_ + element_count()); }

  Tensor clone() const;  // an independent copy
  // The same storage seen with another shape of equal element_count (raises kBadShape otherwise).
  Tensor reshape(const Shape& shape) const;
  // Entries begin..end-1 along axis 0, sharing storage (contiguous in row-major order).
  Tensor leading_slice(int64_t begin, int64_t end) const;
  template <class U>
  Tensor<U> cast() const;

  long use_count() const;  // tensors sharing this storage, 0 when it holds no value

 private:
  detail::BlockHeader* block_ = nullptr;
  T* data_ = nullptr;
  Shape shape_;
};

extern template class Tensor<float>;
extern template class Tensor<double>;

// True when both are defined, have equal shapes and numerically equal
// elements (NaN never equals). For tests and restore checks.
template <class T>
bool equal(const Tensor<T>& a, const Tensor<T>& b);

}  // namespace spar
