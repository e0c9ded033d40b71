// Fuzz target: a saved generator (generator.spar, recipes/saved_generator.h) through load_generator
// on a temporary file, then two samples drawn from what was loaded. The input is the file's bytes.
// A crafted generator.spar (a recorded sample shape, an embedded recipe, tensors that do not
// fit) must be refused with spar::Error before it allocates or computes anything absurd.
// Under libFuzzer the mutator fixes each record's CRC after mutating (fuzz_support.h).
#include <string>

#include "fuzz_support.h"
#include "recipes/saved_generator.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  const std::string path = fuzz::write_scratch("generator.spar", data, size);
  fuzz::run_reader("load_generator", [&] {
    SavedGenerator generator = load_generator(path);
    const Tensor<float> samples = generate_samples(generator, 2, 1, -1);
    const Shape& shape = samples.shape();
    if (shape.rank() < 1 || shape[0] != 2 || shape.without(0) != generator.sample_shape) {
      fuzz::finding("2 samples of a loaded generator have shape " + shape.str() +
                    ", its recorded sample shape is " + generator.sample_shape.str());
    }
  });
  return 0;
}

#ifdef SPAR_LIBFUZZER
extern "C" size_t LLVMFuzzerCustomMutator(uint8_t* data, size_t size, size_t max_size,
                                          unsigned int seed) {
  return spar::fuzz::mutate_archive(data, size, max_size, seed);
}
#endif
