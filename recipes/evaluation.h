// Cheap judgements of a trained generator that need no trained judge of their own.
//
// nearest_training_samples: the class of each generated sample's nearest training sample (Euclidean
// distance over all values). For a class-conditional generator the share whose nearest
// training sample has the requested class says whether it follows its labels; for any
// generator, the counts per class show whether some classes are missing (a sign of mode
// collapse). A nearest-neighbour rule on raw values is crude for images, so read the counts
// as a comparison between runs of the same data, not as a classifier's accuracy.
//
// Thread safety: pure functions.
#pragma once

#include <vector>

#include "recipes/datasets.h"

namespace spar {

struct NearestMatch {
  std::vector<int64_t> labels;    // per sample: the nearest training sample's class
  std::vector<double> distances;  // per sample: the distance to it
};
// `samples` [n, ...] must have the dataset's sample shape; the dataset must be labelled.
NearestMatch nearest_training_samples(const Dataset& data, const Tensor<float>& samples);

}  // namespace spar
