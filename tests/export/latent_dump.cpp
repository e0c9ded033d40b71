// Prints the latent vectors `spar sample` draws for a saved generator, samples 0 to n-1 of a
// seed, as hexadecimal floats, one vector per line (the reference for an exported header).
// Usage: spar_latent_dump RUN_FOLDER SEED N
#include <cstdio>
#include <cstdlib>
#include <exception>

#include "recipes/saved_generator.h"

int main(int argc, char** argv) {
  if (argc != 4) return 2;
  try {
    const spar::SavedGenerator g = spar::load_generator(argv[1]);
    const long long n = std::atoll(argv[3]);
    const spar::Tensor<float> z = spar::latent_vectors(g, n, std::strtoull(argv[2], nullptr, 10));
    for (long long i = 0; i < n; ++i)
      for (long long j = 0; j < g.pair.latent; ++j)
        std::printf("%a%c", static_cast<double>(z.data()[i * g.pair.latent + j]),
                    j + 1 < g.pair.latent ? ',' : '\n');
    return 0;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "spar_latent_dump: %s\n", e.what());
    return 1;
  }
}
