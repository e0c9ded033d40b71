// The exported C header (`spar export --c-header`) beside spar's engine: samples per second of
// the header's forward pass, compiled here with the system's C compiler at -O2 and at
// -O3 -march=native and run on one core, as a fraction of the engine's own sampling on one
// thread in batches of 64, both measured in the same run; and the header's size. The
// generator is the swatches preset's (32 px RGB) with its initial weights: the speed does not
// depend on what the weights are. Without a C compiler (cc, or $CC) the rows are left out,
// with a note.
#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>

#include "benchmarks/bench.h"
#include "engine/parallel.h"
#include "export/c_header.h"
#include "recipes/run_parts.h"

namespace spar {
namespace bench {
namespace {

namespace fs = std::filesystem;

// Times gen_generate (with gen_latent) one sample at a time, three rounds of at least the
// given seconds each; prints the best samples per second.
const char* const kHarness = R"(#define _POSIX_C_SOURCE 199309L
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#define GEN_IMPLEMENTATION
#include "gen.h"
static float z[GEN_LATENT], out[GEN_OUTPUT_SIZE], scratch[GEN_SCRATCH_BYTES / sizeof(float)];
int main(int argc, char** argv) {
  const double min_seconds = argc > 1 ? atof(argv[1]) : 0.5;
  double best = 1e30, sink = 0;
  int round;
  gen_latent(1, 0, z);
  gen_generate(z, -1, out, scratch);
  for (round = 0; round < 3; ++round) {
    struct timespec a, b;
    double seconds = 0;
    long n = 0;
    clock_gettime(CLOCK_MONOTONIC, &a);
    do {
      gen_latent(1, (uint64_t)n, z);
      gen_generate(z, -1, out, scratch);
      sink += out[0];
      ++n;
      clock_gettime(CLOCK_MONOTONIC, &b);
      seconds = (double)(b.tv_sec - a.tv_sec) + 1e-9 * (double)(b.tv_nsec - a.tv_nsec);
    } while (seconds < min_seconds);
    if (seconds / (double)n < best) best = seconds / (double)n;
  }
  printf("%.9g %g\n", 1.0 / best, sink);
  return 0;
}
)";

// Compiles the harness with `flags` and runs it: samples per second, or 0 when either fails.
double header_rate(const fs::path& folder, const std::string& compiler, const std::string& flags,
                   double min_seconds) {
  const fs::path program = folder / "harness";
  const std::string compile = compiler + " -std=c99 " + flags + " -I'" + folder.string() + "' '" +
                              (folder / "harness.c").string() + "' -o '" + program.string() +
                              "' -lm 2>'" + (folder / "cc.log").string() + "'";
  if (std::system(compile.c_str()) != 0) return 0;
  const std::string run = "'" + program.string() + "' " + std::to_string(min_seconds) + " >'" +
                          (folder / "rate.txt").string() + "'";
  if (std::system(run.c_str()) != 0) return 0;
  std::ifstream in(folder / "rate.txt");
  double rate = 0;
  in >> rate;
  return rate;
}

void exported_header(const BenchOptions& o, std::vector<BenchRow>& rows) {
  const char* cc = std::getenv("CC");
  const std::string compiler = cc && *cc ? cc : "cc";
  if (std::system((compiler + " --version >/dev/null 2>&1").c_str()) != 0) {
    std::cerr << "spar bench: export: no C compiler (" << compiler << "); its rows are left out\n";
    return;
  }
  Recipe r = load_recipe("swatches");
  if (o.quick) r.model.width = 4;
  SavedGenerator g;
  g.recipe = r;
  g.sample_shape = Shape{3, r.data.image_size, r.data.image_size};
  g.pair = make_gan_pair(r, g.sample_shape, 0);
  const std::string header = c_header(g, CHeaderOptions{});

  char pattern[] = "/tmp/spar-bench-export-XXXXXX";
  if (!::mkdtemp(pattern)) return;
  const fs::path folder(pattern);
  std::ofstream(folder / "gen.h") << header;
  std::ofstream(folder / "harness.c") << kHarness;
  const double min_seconds = o.quick ? 0.01 : 0.5;

  // The engine on one thread, in batches of 64, from the same kind of latent vectors.
  const int previous = thread_count();
  set_thread_count(1);
  const int64_t batch = 64;
  const Tensor<float> z = latent_vectors(g, batch, 1);
  const double engine_s =
      seconds_per_call([&] { generate_from(g, z, {}); }, min_seconds) / static_cast<double>(batch);
  set_thread_count(previous);

  const std::string size = "32 px RGB, width " + std::to_string(r.model.width) + ", one core";
  for (const auto& [tag, flags] : {std::pair<std::string, std::string>{"-O2", "-O2"},
                                   {"-O3 -march=native", "-O3 -march=native"}}) {
    const double rate = header_rate(folder, compiler, flags, min_seconds);
    if (rate <= 0) {
      std::cerr << "spar bench: export: the harness did not build or run with " << flags << " ("
                << (folder / "cc.log").string() << ")\n";
      continue;
    }
    rows.push_back({"exported header, samples (" + tag + "; ceiling: the engine, batch 64)", size,
                    "samples/s", rate, 1 / engine_s, 0.3, true});
  }
  // The scratch is the one "(N * sizeof(float))" macro of the header.
  const size_t at = header.find("_SCRATCH_BYTES (");
  const double scratch = at == std::string::npos ? 0 : 4 * std::atof(header.c_str() + at + 16);
  rows.push_back({"exported header, size (f32 weights)", size, "bytes",
                  static_cast<double>(header.size()), 0, 0, false});
  rows.push_back({"exported header, scratch per thread", size, "bytes", scratch, 0, 0, false});
  std::error_code ignored;
  fs::remove_all(folder, ignored);
}

}  // namespace

void register_export_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list) {
  list.emplace_back("export", exported_header);
}

}  // namespace bench
}  // namespace spar
