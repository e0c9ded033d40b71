// The tape's invariants (engine/tape.h), one TEST_CASE per numbered invariant, and the
// higher-order derivatives the tape exists to provide, checked against closed forms from
// calculus (common practice).
#include <catch2/catch.hpp>
#include <cmath>
#include <thread>

#include "engine/buffer_pool.h"
#include "engine/error.h"
#include "engine/ops.h"
#include "engine/random.h"
#include "engine/tape_detail.h"  // the nodes, for invariant 1

using namespace spar;
using D = Tensor<double>;
using V = Var<double>;

namespace {
D vec(std::vector<double> v) {
  return D::from_values({static_cast<int64_t>(v.size())}, v);
}

// Options for gradient() with GradientOptions::record set by name: with_record(true) records
// the backward pass, so the gradients can be differentiated again.
GradientOptions with_record(bool record) {
  GradientOptions options;
  options.record = record;
  return options;
}
}  // namespace

TEST_CASE("invariant 1: inputs are recorded before the node that uses them", "[tape]") {
  Tape<double> tape;
  Rng rng(1, 1);
  V x = tape.variable(rng.uniform<double>({3, 4}, -1, 1));
  V w = tape.variable(rng.uniform<double>({4, 2}, -1, 1));
  V y = sum(tanh(matmul(x, w)) * sigmoid(matmul(x, w)));
  tape.gradient(y, {x, w}, with_record(true));
  REQUIRE(tape.size() > 10);
  for (int64_t i = 0; i < tape.size(); ++i)
    for (const V& in : detail::TapeAccess<double>::node(tape, i).inputs)
      if (in.recorded()) CHECK(in.id() < i);
}

TEST_CASE("invariant 2: operations and gradients never write into recorded values", "[tape]") {
  Tape<double> tape;
  Rng rng(2, 1);
  const D a = rng.uniform<double>({5, 3}, -1, 1), b = rng.uniform<double>({3}, -1, 1);
  const D a_copy = a.clone(), b_copy = b.clone();
  V va = tape.variable(a), vb = tape.variable(b);
  V y = sum(square(va * vb + vb) / (vb * vb + 1.0));
  std::vector<V> g = tape.gradient(y, {va, vb}, with_record(true));
  tape.gradient(sum(g[0] * g[0]) + sum(g[1]), {va, vb});
  CHECK(equal(a, a_copy));
  CHECK(equal(b, b_copy));
  CHECK(equal(va.value(), a_copy));
}

TEST_CASE("invariant 3: a value used several times receives the sum of its contributions",
          "[tape]") {
  Tape<double> tape;
  V x = tape.variable(vec({0.5, -2.0, 3.0}));
  // y = Σ (x + x + x·x): dy/dx = 2 + 2x (calculus).
  V y = sum(x + x + x * x);
  D g = tape.gradient(y, {x})[0].value();
  CHECK(g.at({0}) == 3.0);
  CHECK(g.at({1}) == -2.0);
  CHECK(g.at({2}) == 8.0);
  // And the accumulation order is fixed: the same gradient twice is bit-identical.
  D g2 = tape.gradient(y, {x})[0].value();
  CHECK(equal(g, g2));
}

TEST_CASE("invariant 4: gradients flow only to recorded variables", "[tape]") {
  Tape<double> tape;
  V x = tape.variable(vec({1.0, 2.0}));
  V c(vec({3.0, 4.0}));  // a constant
  V y = sum(x * c);
  CHECK_THROWS_AS(tape.gradient(y, {c}), Error);
  V unrelated = tape.variable(vec({7.0}));
  std::vector<V> g = tape.gradient(y, {x, unrelated});
  CHECK(g[0].value().at({1}) == 4.0);
  CHECK(g[1].value().at({0}) == 0.0);  // y does not depend on it: zeros
  {
    NoRecordScope off;
    V z = x * x;
    CHECK_FALSE(z.recorded());
  }
  CHECK((x * x).recorded());
}

TEST_CASE("invariant 5: a cleared tape refuses its old variables, and tapes do not mix", "[tape]") {
  Tape<double> tape, other;
  V x = tape.variable(vec({1.0}));
  V o = other.variable(vec({2.0}));
  CHECK_THROWS_WITH(x + o, Catch::Contains("different tapes"));
  tape.clear();
  CHECK_THROWS_WITH(x * x, Catch::Contains("before the tape was cleared"));
  V fresh = tape.variable(vec({1.0}));
  CHECK_NOTHROW(fresh * fresh);
}

TEST_CASE(
    "invariant 6: clear() returns memory to the pool and a repeated step allocates nothing new",
    "[tape]") {
  Tape<float> tape;
  Rng rng(3, 1);
  const Tensor<float> w = rng.uniform<float>({64, 64}, -1, 1),
                      x = rng.uniform<float>({32, 64}, -1, 1);
  auto step = [&] {
    tape.clear();
    Var<float> vw = tape.variable(w);
    Var<float> loss = mean(square(tanh(matmul(Var<float>(x), vw))));
    tape.gradient(loss, {vw});
  };
  step();
  step();
  const int64_t fresh = pool_stats().fresh_allocations;
  const int64_t nodes = tape.size();
  for (int i = 0; i < 50; ++i) step();
  CHECK(pool_stats().fresh_allocations == fresh);
  CHECK(tape.size() == nodes);
  const int64_t in_use = pool_stats().bytes_in_use;
  tape.clear();
  CHECK(pool_stats().bytes_in_use < in_use);
}

TEST_CASE("invariant 7: the no-record switch belongs to one thread", "[tape]") {
  NoRecordScope off;
  CHECK_FALSE(recording_enabled());
  bool other_thread_records = false;
  std::thread t([&] { other_thread_records = recording_enabled(); });
  t.join();
  CHECK(other_thread_records);
}

TEST_CASE("invariant 8: fused and recorded adjoints give the same gradient", "[tape]") {
  // batch_normalise, leaky relu, relu and tanh have fused adjoints; the recorded backward pass
  // composes ops instead. Both must agree, and only the recorded one may be differentiated again.
  Rng rng(8, 1);
  const D x0 = rng.uniform<double>({4, 3, 2, 2}, -2, 2),
          w0 = rng.uniform<double>({4, 3, 2, 2}, -1, 1);
  const D gamma0 = rng.uniform<double>({3}, 0.5, 2), beta0 = rng.uniform<double>({3}, -1, 1);
  auto gradients = [&](bool record) {
    Tape<double> tape;
    V x = tape.variable(x0), gamma = tape.variable(gamma0), beta = tape.variable(beta0);
    V y = leaky_relu(batch_normalise(x, gamma, beta, 1e-3), 0.2);
    V loss = sum(multiply(V(w0), add(tanh(y), square(relu(y)))));
    std::vector<V> g = tape.gradient(loss, {x, gamma, beta}, with_record(record));
    for (const V& v : g) CHECK(v.recorded() == record);
    std::vector<D> out;
    for (const V& v : g) out.push_back(v.value());
    return out;
  };
  const std::vector<D> fused = gradients(false), recorded = gradients(true);
  for (size_t k = 0; k < fused.size(); ++k)
    for (int64_t i = 0; i < fused[k].element_count(); ++i)
      CHECK(fused[k].data()[i] == Approx(recorded[k].data()[i]).margin(1e-12).epsilon(1e-12));
}

TEST_CASE("the gradient of a gradient: d³/dx³ x⁴ = 24x (calculus)", "[tape][second-order]") {
  Tape<double> tape;
  V x = tape.variable(vec({0.5, -1.5}));
  V g1 = tape.gradient(sum(power(x, 4.0)), {x}, with_record(true))[0];  // 4x³
  V g2 = tape.gradient(sum(g1), {x}, with_record(true))[0];             // 12x²
  V g3 = tape.gradient(sum(g2), {x})[0];                                // 24x
  CHECK(g1.value().at({1}) == Approx(4 * -3.375).epsilon(1e-14));
  CHECK(g2.value().at({0}) == Approx(12 * 0.25).epsilon(1e-14));
  CHECK(g3.value().at({0}) == Approx(12.0).epsilon(1e-14));
  CHECK(g3.value().at({1}) == Approx(-36.0).epsilon(1e-14));
}

TEST_CASE("Hessian of a quadratic form xᵀAx is A + Aᵀ (calculus)", "[tape][second-order]") {
  Tape<double> tape;
  Rng rng(4, 1);
  const D a = rng.uniform<double>({4, 4}, -1, 1);
  V x = tape.variable(rng.uniform<double>({4, 1}, -1, 1));
  V f = sum(matmul(matmul(x, V(a), true, false), x));  // xᵀ A x
  V g = tape.gradient(f, {x}, with_record(true))[0];
  for (int j = 0; j < 4; ++j) {  // column j of the Hessian = ∇(g_j)
    V hj = tape.gradient(sum(slice(g, 0, j, j + 1)), {x})[0];
    for (int i = 0; i < 4; ++i)
      CHECK(hj.value().at({i, 0}) == Approx(a.at({i, j}) + a.at({j, i})).epsilon(1e-13));
  }
}

TEST_CASE("gradient of the squared gradient norm equals 2·H·∇f (calculus)",
          "[tape][second-order]") {
  // f(x) = Σ exp(x)·x: ∇f = e^x (1 + x), H = diag(e^x (2 + x)).
  Tape<double> tape;
  V x = tape.variable(vec({-0.3, 0.1, 0.8}));
  V g = tape.gradient(sum(exp(x) * x), {x}, with_record(true))[0];
  D r = tape.gradient(sum(g * g), {x})[0].value();
  for (int i = 0; i < 3; ++i) {
    const double xi = x.value().at({i}), e = std::exp(xi);
    CHECK(r.at({i}) == Approx(2 * e * (2 + xi) * e * (1 + xi)).epsilon(1e-13));
  }
}

TEST_CASE("gradient() rejects a non-scalar and a recording request with recording off", "[tape]") {
  Tape<double> tape;
  V x = tape.variable(vec({1.0, 2.0}));
  CHECK_THROWS_WITH(tape.gradient(x * x, {x}), Catch::Contains("[2]"));
  V y = sum(x * x);
  NoRecordScope off;
  CHECK_THROWS_AS(tape.gradient(y, {x}, with_record(true)), Error);
}

TEST_CASE("vector_jacobian_product seeds the adjoint of a non-scalar value", "[tape]") {
  // y = x ⊙ x, seed s: sᵀ·∂y/∂x = 2·x ⊙ s (calculus).
  Tape<double> tape;
  V x = tape.variable(vec({1.5, -2.0}));
  const D g = tape.vector_jacobian_product(x * x, {x}, V(vec({3.0, 0.5})))[0].value();
  CHECK(g.at({0}) == 9.0);
  CHECK(g.at({1}) == -2.0);
  CHECK_THROWS_WITH(tape.vector_jacobian_product(x * x, {x}, V(vec({1.0}))),
                    Catch::Contains("seed"));
}
