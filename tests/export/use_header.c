/* Uses an exported generator header (prefix gen) with nothing but a C or C++ compiler:
   prints the latent vectors of samples 0 to n-1 of a seed as hexadecimal floats
   (latents.txt), then the samples as CSV, the values spar sample writes (samples.csv), with
   each sample drawn through a function of the second translation unit, which includes the
   header without its implementation (second_unit.c), so the linkage is tested too.
   Usage: use_header SEED N LATENTS_FILE SAMPLES_FILE */
#include <stdio.h>
#include <stdlib.h>

#define GEN_IMPLEMENTATION
#include "gen.h"

void draw_sample(uint64_t seed, uint64_t index, float* out); /* second_unit.c */

int main(int argc, char** argv) {
  unsigned long long seed;
  long n, i;
  int j;
  float z[GEN_LATENT], out[GEN_OUTPUT_SIZE];
  FILE* latents;
  FILE* samples;
  if (argc != 5) return 2;
  seed = strtoull(argv[1], NULL, 10);
  n = atol(argv[2]);
  latents = fopen(argv[3], "w");
  samples = fopen(argv[4], "w");
  if (!latents || !samples) return 1;
  for (i = 0; i < n; ++i) {
    gen_latent((uint64_t)seed, (uint64_t)i, z);
    for (j = 0; j < GEN_LATENT; ++j) fprintf(latents, "%a%c", (double)z[j], j + 1 < GEN_LATENT ? ',' : '\n');
    draw_sample((uint64_t)seed, (uint64_t)i, out);
    for (j = 0; j < GEN_OUTPUT_SIZE; ++j)
      fprintf(samples, "%.9g%c", (double)out[j], j + 1 < GEN_OUTPUT_SIZE ? ',' : '\n');
  }
  fclose(latents);
  fclose(samples);
  return 0;
}
