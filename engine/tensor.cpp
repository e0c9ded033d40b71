#include "engine/tensor.h"

#include <algorithm>
#include <cstring>

#include "engine/error.h"

namespace spar {

template <class T>
Tensor<T>::Tensor(const Tensor& other)
    : block_(other.block_), data_(other.data_), shape_(other.shape_) {
  if (block_) detail::retain_block(block_);
}

template <class T>
Tensor<T>::Tensor(Tensor&& other) noexcept
    : block_(other.block_), data_(other.data_), shape_(other.shape_) {
  other.block_ = nullptr;
  other.data_ = nullptr;
}

template <class T>
Tensor<T>& Tensor<T>::operator=(const Tensor& other) {
  if (other.block_) detail::retain_block(other.block_);
  if (block_) detail::release_block(block_);
  block_ = other.block_;
  data_ = other.data_;
  shape_ = other.shape_;
  return *this;
}

template <class T>
Tensor<T>& Tensor<T>::operator=(Tensor&& other) noexcept {
  if (this != &other) {
    if (block_) detail::release_block(block_);
    block_ = other.block_;
    data_ = other.data_;
    shape_ = other.shape_;
    other.block_ = nullptr;
    other.data_ = nullptr;
  }
  return *this;
}

template <class T>
Tensor<T>::~Tensor() {
  if (block_) detail::release_block(block_);
}

template <class T>
Tensor<T> Tensor<T>::uninitialised(const Shape& shape) {
  Tensor t;
  t.block_ = detail::acquire_block(static_cast<size_t>(shape.element_count()) * sizeof(T));
  t.data_ = static_cast<T*>(detail::block_data(t.block_));
  t.shape_ = shape;
  return t;
}

template <class T>
Tensor<T> Tensor<T>::zeros(const Shape& shape) {
  return full(shape, T(0));
}

template <class T>
Tensor<T> Tensor<T>::full(const Shape& shape, T value) {
  Tensor t = uninitialised(shape);
  std::fill(t.data_, t.data_ + shape.element_count(), value);
  return t;
}

template <class T>
Tensor<T> Tensor<T>::from_values(const Shape& shape, const std::vector<T>& values) {
  if (static_cast<int64_t>(values.size()) != shape.element_count())
    raise(ErrorKind::kBadShape,
          "tensor: " + std::to_string(values.size()) + " values do not fill shape " + shape.str());
  Tensor t = uninitialised(shape);
  std::copy(values.begin(), values.end(), t.data_);
  return t;
}

template <class T>
T Tensor<T>::as_scalar() const {
  if (!has_value() || element_count() != 1)
    raise(ErrorKind::kBadShape, "item: tensor of shape " + shape_.str() + " is not one element");
  return data_[0];
}

template <class T>
T Tensor<T>::at(std::initializer_list<int64_t> index) const {
  if (static_cast<int>(index.size()) != rank())
    raise(ErrorKind::kBadShape,
          "at: " + std::to_string(index.size()) + " indices for shape " + shape_.str());
  int64_t flat = 0;
  int axis = 0;
  for (int64_t i : index) {
    if (i < 0 || i >= shape_[axis])
      raise(ErrorKind::kBadShape, "at: index " + std::to_string(i) + " out of range for axis " +
                                      std::to_string(axis) + " of shape " + shape_.str());
    flat = flat * shape_[axis++] + i;
  }
  return data_[flat];
}

template <class T>
Tensor<T> Tensor<T>::clone() const {
  if (!has_value()) return Tensor();
  Tensor t = uninitialised(shape_);
  std::memcpy(t.data_, data_, static_cast<size_t>(element_count()) * sizeof(T));
  return t;
}

template <class T>
Tensor<T> Tensor<T>::reshape(const Shape& shape) const {
  if (shape.element_count() != element_count())
    raise(ErrorKind::kBadShape,
          "reshape: cannot view shape " + shape_.str() + " as " + shape.str());
  Tensor t = *this;
  t.shape_ = shape;
  return t;
}

template <class T>
Tensor<T> Tensor<T>::leading_slice(int64_t begin, int64_t end) const {
  if (rank() == 0 || begin < 0 || end > shape_[0] || begin > end)
    raise(ErrorKind::kBadShape, "leading_slice: rows " + std::to_string(begin) + ".." +
                                    std::to_string(end) + " of shape " + shape_.str());
  Tensor t = *this;
  int64_t row = shape_[0] == 0 ? 0 : element_count() / shape_[0];
  t.data_ = data_ + begin * row;
  t.shape_ = shape_.with(0, end - begin);
  return t;
}

template <class T>
template <class U>
Tensor<U> Tensor<T>::cast() const {
  Tensor<U> t = Tensor<U>::uninitialised(shape_);
  U* out = t.mutable_data();
  for (int64_t i = 0; i < element_count(); ++i) out[i] = static_cast<U>(data_[i]);
  return t;
}

template <class T>
long Tensor<T>::use_count() const {
  return block_ ? static_cast<long>(__atomic_load_n(&block_->refs, __ATOMIC_RELAXED)) : 0;
}

template <class T>
bool equal(const Tensor<T>& a, const Tensor<T>& b) {
  if (!a.has_value() || !b.has_value() || a.shape() != b.shape()) return false;
  return std::equal(a.data(), a.data() + a.element_count(), b.data());
}

template class Tensor<float>;
template class Tensor<double>;
template Tensor<double> Tensor<float>::cast<double>() const;
template Tensor<float> Tensor<double>::cast<float>() const;
template Tensor<float> Tensor<float>::cast<float>() const;
template Tensor<double> Tensor<double>::cast<double>() const;
template bool equal(const Tensor<float>&, const Tensor<float>&);
template bool equal(const Tensor<double>&, const Tensor<double>&);

}  // namespace spar
