// Loads a trained generator and prints what it is and n samples drawn from a seed, one sample
// per line as comma-separated values (as `spar sample RUN -n N --seed S -o FILE.csv` writes
// them), or one line naming the problem and exit 1.
// Usage: generate_in_process RUN_FOLDER_OR_GENERATOR_SPAR N SEED
#include <cstdio>
#include <cstdlib>
#include <exception>

#include "recipes/saved_generator.h"

int main(int argc, char** argv) {
  if (argc != 4) {
    std::fprintf(stderr, "usage: generate_in_process RUN_FOLDER N SEED\n");
    return 2;
  }
  try {
    spar::SavedGenerator g = spar::load_generator(argv[1]);
    const long long n = std::atoll(argv[2]);
    const unsigned long long seed = std::strtoull(argv[3], nullptr, 10);
    std::fprintf(stderr, "step %lld, samples of shape %s, %zu classes\n",
                 static_cast<long long>(g.step), g.sample_shape.str().c_str(),
                 g.class_names.size());
    // Classes in turn for a conditional generator, as `spar sample` without --class.
    const spar::Tensor<float> samples = spar::generate_samples(g, n, seed, -1);
    const long long width = samples.element_count() / n;
    for (long long i = 0; i < n; ++i)
      for (long long j = 0; j < width; ++j)
        std::printf("%.6g%c", static_cast<double>(samples.data()[i * width + j]),
                    j + 1 < width ? ',' : '\n');
    return 0;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "generate_in_process: %s\n", e.what());
    return 1;
  }
}
