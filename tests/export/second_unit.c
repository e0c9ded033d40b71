/* The second translation unit of use_header: the declarations only (no GEN_IMPLEMENTATION).
   Classes in turn for a conditional generator, as spar sample draws without --class. */
#include "gen.h"

void draw_sample(uint64_t seed, uint64_t index, float* out);

void draw_sample(uint64_t seed, uint64_t index, float* out) {
  float z[GEN_LATENT];
  float scratch[GEN_SCRATCH_BYTES / sizeof(float)];
  const int class_index = GEN_CLASSES > 0 ? (int)(index % (GEN_CLASSES > 0 ? GEN_CLASSES : 1)) : -1;
  gen_latent(seed, index, z);
  gen_generate(z, class_index, out, scratch);
}
