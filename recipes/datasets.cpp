#include "recipes/datasets.h"

#include <algorithm>
#include <cstring>

#include "engine/error.h"

namespace spar {

Shape Dataset::sample_shape() const {
  const Shape& s = samples.shape();
  return Shape(s.begin() + 1, s.end());
}

DatasetSource::DatasetSource(Dataset data, uint64_t seed) : data_(std::move(data)), seed_(seed) {
  if (data_.size() < 2)
    raise(ErrorKind::kBadInputFile, data_.origin + ": holds " + std::to_string(data_.size()) +
                                        " samples; training needs at least 2");
  if (!data_.labels.empty() && static_cast<int64_t>(data_.labels.size()) != data_.size())
    raise(ErrorKind::kBadArgument, data_.origin + ": " + std::to_string(data_.labels.size()) +
                                       " labels for " + std::to_string(data_.size()) + " samples");
  shuffle_for_epoch();
}

void DatasetSource::shuffle_for_epoch() {
  const int64_t n = data_.size();
  order_.resize(static_cast<size_t>(n));
  for (int64_t i = 0; i < n; ++i) order_[static_cast<size_t>(i)] = i;
  // One stream per epoch, derived from the seed alone: the order needs no saved state.
  Rng rng(seed_, derive_stream(seed_, "data") + static_cast<uint64_t>(epoch_));
  for (int64_t i = n - 1; i > 0; --i)
    std::swap(order_[static_cast<size_t>(i)],
              order_[static_cast<size_t>(rng.below(static_cast<uint64_t>(i + 1)))]);
}

Batch DatasetSource::next_batch(int64_t n) {
  const Shape one = data_.sample_shape();
  const int64_t width = one.element_count();
  std::vector<int64_t> dims{n};
  dims.insert(dims.end(), one.begin(), one.end());
  Batch batch{Tensor<float>::uninitialised(Shape(dims.begin(), dims.end())), {}};
  float* out = batch.samples.mutable_data();
  const float* in = data_.samples.data();
  for (int64_t i = 0; i < n; ++i) {
    if (offset_ == data_.size()) {
      ++epoch_;
      offset_ = 0;
      shuffle_for_epoch();
    }
    const int64_t row = order_[static_cast<size_t>(offset_++)];
    std::memcpy(out + i * width, in + row * width, sizeof(float) * static_cast<size_t>(width));
    if (!data_.labels.empty()) batch.labels.push_back(data_.labels[static_cast<size_t>(row)]);
  }
  return batch;
}

void DatasetSource::save(Archive& archive, const std::string& prefix) const {
  archive.put_int(prefix + ".samples", data_.size());
  archive.put_int(prefix + ".epoch", epoch_);
  archive.put_int(prefix + ".offset", offset_);
}

void DatasetSource::load(const Archive& archive, const std::string& prefix) {
  // The order is rebuilt from the seed, so the data must be the same; its size is the check
  // a checkpoint can make cheaply (a changed folder usually changes it).
  const int64_t saved = archive.integer(prefix + ".samples");
  if (saved != data_.size())
    raise(ErrorKind::kCorruptCheckpoint,
          archive.source() + ": the run was trained on " + std::to_string(saved) +
              " samples, but " + data_.origin + " now holds " + std::to_string(data_.size()));
  epoch_ = archive.integer(prefix + ".epoch");
  offset_ = archive.integer(prefix + ".offset");
  if (epoch_ < 0 || offset_ < 0 || offset_ > data_.size())
    raise(ErrorKind::kCorruptCheckpoint, prefix + ": data position " + std::to_string(offset_) +
                                             " does not fit " + std::to_string(data_.size()) +
                                             " samples");
  shuffle_for_epoch();
}

}  // namespace spar
