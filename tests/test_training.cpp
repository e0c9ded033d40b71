// The training loop: same seed, same bits; a run stopped, saved and resumed equals one run
// straight; the reference architectures produce the shapes their recipes promise.
#include <catch2/catch.hpp>

#include "recipes/training.h"
#include "tests/support.h"

using namespace spar;

namespace {

std::unique_ptr<TrainingRun> ring_trainer(uint64_t seed,
                                          Objective objective = Objective::kNonSaturating,
                                          double penalty = 0) {
  Rng init(seed, derive_stream(seed, "initialisation"));
  MlpPairOptions mlp;
  mlp.width = 32;
  mlp.depth = 2;
  TrainingOptions options;
  options.batch = 32;
  options.seed = seed;
  options.objective = objective;
  options.gradient_penalty = penalty;
  return std::make_unique<TrainingRun>(make_mlp_pair(mlp, init),
                                       std::make_unique<MixtureSource>(ring_of_8(), seed), options);
}

void check_same_generators(TrainingRun& a, TrainingRun& b) {
  const auto pa = a.pair().generator->all_parameters(), pb = b.pair().generator->all_parameters();
  REQUIRE(pa.size() == pb.size());
  for (size_t i = 0; i < pa.size(); ++i) {
    INFO(pa[i].name);
    CHECK(testing::same_bits(*pa[i].tensor, *pb[i].tensor));
  }
  Rng z1(5, 5), z2(5, 5);
  CHECK(testing::same_bits(a.generate(a.draw_latent(16, z1)), b.generate(b.draw_latent(16, z2))));
}

}  // namespace

TEST_CASE("two runs with the same seed give bit-identical generators", "[trainer]") {
  auto a = ring_trainer(3), b = ring_trainer(3), c = ring_trainer(4);
  for (int i = 0; i < 30; ++i) a->step(), b->step(), c->step();
  check_same_generators(*a, *b);
  CHECK_FALSE(testing::same_bits(*a->pair().generator->all_parameters()[0].tensor,
                                 *c->pair().generator->all_parameters()[0].tensor));
}

TEST_CASE("30 steps straight equal 15 steps, save, load into a new trainer, 15 more", "[trainer]") {
  for (double penalty : {0.0, 10.0}) {  // also through the gradient penalty's second-order path
    const Objective objective = penalty > 0 ? Objective::kWasserstein : Objective::kNonSaturating;
    auto straight = ring_trainer(7, objective, penalty),
         first = ring_trainer(7, objective, penalty);
    for (int i = 0; i < 30; ++i) straight->step();
    for (int i = 0; i < 15; ++i) first->step();
    Archive archive;
    first->save(archive);
    auto resumed = ring_trainer(7, objective, penalty);
    resumed->load(Archive::from_bytes(archive.to_bytes(), "state"));
    CHECK(resumed->steps_done() == 15);
    for (int i = 0; i < 15; ++i) resumed->step();
    INFO("gradient penalty " << penalty);
    check_same_generators(*straight, *resumed);
  }
}

TEST_CASE("a saved state refuses another architecture, naming the tensor", "[trainer]") {
  auto small = ring_trainer(1);
  Archive archive;
  small->save(archive);
  Rng init(1, 1);
  MlpPairOptions wider;
  wider.width = 64;
  wider.depth = 2;
  TrainingRun other(make_mlp_pair(wider, init), std::make_unique<MixtureSource>(ring_of_8(), 1),
                    TrainingOptions{});
  std::string message;
  CHECK(testing::error_kind_of([&] { other.load(archive); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK_THAT(message, Catch::Contains("generator/hidden1/matrix"));
}

TEST_CASE("DCGAN-style pairs make and judge images of 28, 32 and 64 pixels",
          "[trainer][architectures]") {
  for (int64_t size : {28, 32, 64}) {
    for (int64_t channels : {1, 3}) {
      Rng rng(2, 2);
      DcganPairOptions o;
      o.image_size = size;
      o.channels = channels;
      o.latent = 16;
      o.width = 8;
      GanPair pair = make_dcgan_pair(o, rng);
      Context<float> eval(nullptr, false);
      NoRecordScope no_record;
      const Var<float> images = pair.generator->run(Var<float>(rng.normal<float>({3, 16})), eval);
      INFO(size << " px, " << channels << " channels");
      CHECK(images.shape() == Shape{3, channels, size, size});
      CHECK(pair.critic->run(images, eval).shape() == Shape{3, 1});
      float largest = 0;
      for (float v : images.value().to_vector()) largest = std::max(largest, std::abs(v));
      CHECK(largest <= 1.0f);  // tanh output
    }
  }
  Rng rng(1, 1);
  DcganPairOptions bad;
  bad.image_size = 48;
  CHECK_THROWS_WITH(make_dcgan_pair(bad, rng), Catch::Contains("48"));
}
