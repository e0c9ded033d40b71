// Fuzz target: IDX files, plain or gzipped (recipes/idx.h), through read_idx,
// read_idx_integers and load_idx_dataset on a temporary file. The input is the file's bytes.
// What a reader accepts must agree with itself: as many values as the extents multiply to,
// and images scaled into [−1, 1]. Under libFuzzer, gzipped inputs are mostly mutated after
// inflating and compressed again (fuzz_support.h), so the reader behind zlib is explored.
#include <string>

#include "fuzz_support.h"
#include "recipes/datasets.h"
#include "recipes/idx.h"

namespace {

int64_t product(const std::vector<int64_t>& extents) {
  int64_t n = 1;
  for (int64_t e : extents) n *= e;  // the reader guarantees this does not overflow
  return n;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  const std::string path = fuzz::write_scratch("data.idx", data, size);
  fuzz::run_reader("read_idx", [&] {
    const IdxTensor t = read_idx(path);
    if (t.values.shape() != Shape(t.extents.begin(), t.extents.end())) {
      fuzz::finding("read_idx: values of shape " + t.values.shape().str() +
                    " for the file's extents");
    }
  });
  fuzz::run_reader("read_idx_integers", [&] {
    const IdxIntegers t = read_idx_integers(path);
    if (static_cast<int64_t>(t.values.size()) != product(t.extents)) {
      fuzz::finding("read_idx_integers: " + std::to_string(t.values.size()) +
                    " values for extents whose product is " + std::to_string(product(t.extents)));
    }
  });
  fuzz::run_reader("load_idx_dataset", [&] {
    const Dataset d = load_idx_dataset(path, "");
    fuzz::require_unit_range(d.samples, "load_idx_dataset");
  });
  return 0;
}

#ifdef SPAR_LIBFUZZER
extern "C" size_t LLVMFuzzerCustomMutator(uint8_t* data, size_t size, size_t max_size,
                                          unsigned int seed) {
  return spar::fuzz::mutate_maybe_gzipped(data, size, max_size, seed);
}
#endif
