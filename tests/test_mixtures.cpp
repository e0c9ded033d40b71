// The built-in 2-D mixtures and the mode-coverage protocol (Lin et al. 2018; Srivastava et al.
// 2017), checked against their definitions and the distribution of a 2-D Gaussian's radius.
#include <catch2/catch.hpp>
#include <cmath>
#include <set>

#include "recipes/data_sources.h"
#include "recipes/mixtures.h"

using namespace spar;

TEST_CASE("the ring has 8 distinct unit-radius modes and the grid 25 (Lin et al. 2018)",
          "[mixtures]") {
  const Mixture ring = ring_of_8();
  std::set<std::pair<long, long>> distinct;
  for (const auto& m : ring.means) {
    CHECK(std::hypot(m.first, m.second) == Approx(1.0));
    distinct.emplace(std::lround(m.first * 1e6), std::lround(m.second * 1e6));
  }
  CHECK(distinct.size() == 8);  // a linspace including 2π would give only 7
  CHECK(ring.stddev == 0.01);
  const Mixture grid = grid_of_25();
  CHECK(grid.means.size() == 25);
  CHECK(grid.means.front() == std::make_pair(-4.0, -4.0));
  CHECK(grid.means.back() == std::make_pair(4.0, 4.0));
  CHECK(grid.stddev == 0.05);
  Recipe unknown;
  unknown.data.source = "ring9";
  CHECK_THROWS_WITH(data_source_of(unknown),
                    Catch::Contains("data.source") && Catch::Contains("\"ring9\""));
  unknown.data.source = "grid25";
  CHECK(data_source_of(unknown).endless());
  CHECK(data_source_of(unknown).mixture().means.size() == 25);
}

TEST_CASE("true samples cover every mode with the high-quality fraction of a 2-D Gaussian",
          "[mixtures]") {
  // For isotropic 2-D Gaussian noise, P(‖e‖ ≤ 3σ) = 1 − exp(−9/2) ≈ 0.98889 (the radius
  // follows a Rayleigh distribution; scipy.stats.chi2.cdf(9, 2) gives the same value).
  const double expected = 1 - std::exp(-4.5);
  for (const Mixture& m : {ring_of_8(), grid_of_25()}) {
    Rng rng(3, 1);
    const int64_t n = 100000;
    const ModeCoverage c = mode_coverage(m, sample_mixture(m, n, rng));
    INFO(m.name);
    CHECK(c.modes_captured == c.modes_total);
    const double se = std::sqrt(expected * (1 - expected) / n);
    CHECK(std::abs(c.high_quality_fraction - expected) < 5 * se);
    for (int64_t count : c.high_quality_per_mode)  // each mode gets about n/k samples
      CHECK(std::abs(count - expected * n / m.means.size()) <
            5 * std::sqrt(double(n) / m.means.size()));
  }
}

TEST_CASE("a generator stuck on one mode captures one mode", "[mixtures]") {
  const Mixture ring = ring_of_8();
  Tensor<float> points = Tensor<float>::uninitialised({2500, 2});
  for (int64_t i = 0; i < 2500; ++i) {
    points.mutable_data()[2 * i] = 1.0f;
    points.mutable_data()[2 * i + 1] = 0.005f;
  }
  const ModeCoverage c = mode_coverage(ring, points);
  CHECK(c.modes_captured == 1);
  CHECK(c.high_quality_fraction == 1.0);
  points.mutable_data()[0] = 0.5f;  // off every mode: not high quality
  CHECK(mode_coverage(ring, points).high_quality_fraction == Approx(2499.0 / 2500));
}
