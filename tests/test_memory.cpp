// Memory stays flat: resident memory after 10,000 forward-and-backward steps equals that
// after 100 (engine/tape.h, invariant 6).
#include <unistd.h>

#include <catch2/catch.hpp>
#include <fstream>

#include "engine/buffer_pool.h"
#include "engine/ops.h"
#include "engine/optimizer.h"
#include "engine/random.h"

using namespace spar;

namespace {
// Resident set size in bytes, from /proc/self/statm (Linux).
int64_t resident_bytes() {
  std::ifstream statm("/proc/self/statm");
  int64_t pages_total = 0, pages_resident = 0;
  statm >> pages_total >> pages_resident;
  return pages_resident * sysconf(_SC_PAGESIZE);
}
}  // namespace

TEST_CASE("resident memory after 10,000 training steps equals that after 100", "[memory]") {
  Rng rng(21, 1);
  Tensor<float> w1 = rng.normal<float>({16, 64}, 0, 0.2f), w2 = rng.normal<float>({64, 1}, 0, 0.2f);
  const Tensor<float> x = rng.uniform<float>({32, 16}, -1, 1),
                      t = rng.uniform<float>({32, 1}, 0, 1);
  Adam<float> adam(AdamOptions{});
  Tape<float> tape;
  auto step = [&] {
    tape.clear();
    Var<float> v1 = tape.variable(w1), v2 = tape.variable(w2);
    Var<float> logits = matmul(leaky_relu(matmul(Var<float>(x), v1), 0.2), v2);
    Var<float> loss = mean(logistic_cross_entropy(logits, Var<float>(t)));
    std::vector<Var<float>> g = tape.gradient(loss, {v1, v2});
    adam.step({&w1, &w2}, {g[0].value(), g[1].value()});
  };
  for (int i = 0; i < 100; ++i) step();
  const int64_t rss_100 = resident_bytes();
  const int64_t fresh_100 = pool_stats().fresh_allocations;
  for (int i = 100; i < 10000; ++i) step();
  const int64_t rss_10000 = resident_bytes();
  INFO("resident after 100 steps " << rss_100 << " B, after 10,000 " << rss_10000 << " B");
  // A leak of one 64-byte block per step would add 640 KB; allow 256 KiB of allocator noise.
  CHECK(rss_10000 - rss_100 < 256 * 1024);
  CHECK(pool_stats().fresh_allocations == fresh_100);  // no new storage after warm-up
}
