// Optimizer<T>: updates a list of parameter tensors from their gradients, one step at a
// time, keeping whatever per-parameter state the method needs (moments, velocities).
// Three methods: Adam (with optional decoupled weight decay), MomentumSgd and RmsProp.
//
// Parameters are never written in place: step() computes each new value into a freshly
// allocated tensor and assigns it to *params[i], so a tensor that still shares the old
// storage (a recorded tape, a snapshot) keeps seeing the old values. The optimiser's own
// state is private to it and is updated in place.
//
// Elementwise work runs through parallel_for_chunks_of (parallel.h); every element is
// computed independently, so results are bit-identical whatever the thread count.
//
// Thread safety: one optimiser must not be used from two threads at once; distinct
// optimisers are independent. Optimisers are not copyable (their state is updated in place).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "engine/tensor.h"

namespace spar {

template <class T>
class Optimizer {
 public:
  virtual ~Optimizer() = default;
  Optimizer(const Optimizer&) = delete;
  Optimizer& operator=(const Optimizer&) = delete;

  // One update. params and grads are parallel lists: grads[i] is the gradient of the loss
  // with respect to *params[i] and has its shape. The list must have the same length, order
  // and shapes at every step (state is kept by position). Raises kBadShape naming the index
  // and both shapes on any mismatch, before anything is changed. Each *params[i] is replaced
  // by a fresh tensor; the old storage is not touched.
  virtual void step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) = 0;

  // Writes the complete state (step count, learning rate, per-parameter state) as records
  // named "<prefix>/..." (docs/file-formats.md, "Optimiser state in an archive").
  virtual void save(Archive& archive, const std::string& prefix) const = 0;
  // Replaces this optimiser's state with the one saved under `prefix`, so that the next
  // steps are bit-identical to those the saved optimiser would have taken. The other
  // options (betas, epsilon, ...) stay as constructed. Raises kCorruptCheckpoint naming the
  // record when one is missing, of the wrong kind or dtype, or inconsistent.
  virtual void load(const Archive& archive, const std::string& prefix) = 0;

  int64_t steps_taken() const { return steps_; }  // completed step() calls, 0 at first
  // The step size of the next step. It has one home, the method's options (options() of
  // Adam, MomentumSgd, RmsProp), which set_learning_rate and load change.
  virtual double learning_rate() const = 0;
  // Takes effect at the next step; raises kBadArgument unless finite and >= 0.
  void set_learning_rate(double learning_rate);

 protected:
  // Checks the learning rate of the method's options (raises kBadArgument naming the method).
  Optimizer(double learning_rate, const char* method);
  // Stores a checked learning rate in the method's options.
  virtual void assign_learning_rate(double learning_rate) = 0;

  // Checks the lists against each other and against `state` (one tensor per parameter,
  // empty before the first step); raises kBadShape as described at step().
  void check_lists(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads,
                   const std::vector<Tensor<T>>& state) const;
  // Zero tensors shaped like grads, when `state` is still empty.
  static void init_state(std::vector<Tensor<T>>& state, const std::vector<Tensor<T>>& grads);
  // Replaces each *params[i] by a fresh tensor whose elements begin..end-1 are written by
  // update(i, begin, end, fresh data); all parameters in one parallel region
  // (parallel_for_chunks_of), which also spreads the many small ones over the threads.
  template <class Update>
  static void replace_each(const std::vector<Tensor<T>*>& params, Update&& update);

  // Save/load of what every method has: method name, steps, learning rate and the number of
  // parameters with state. read_common checks them and changes nothing; commit_common
  // applies them once the method's own records have been read too, so a failed load leaves
  // the optimiser as it was.
  struct Common {
    int64_t steps = 0;
    double learning_rate = 0;
    int64_t count = 0;
  };
  void save_common(Archive& archive, const std::string& prefix, int64_t count) const;
  Common read_common(const Archive& archive, const std::string& prefix) const;
  void commit_common(const Common& common) {
    steps_ = common.steps;
    assign_learning_rate(common.learning_rate);
  }
  static void save_list(Archive& archive, const std::string& name,
                        const std::vector<Tensor<T>>& list);
  // Reads `count` tensors "<name>/<i>", requiring equal shapes to `like` when it is non-empty.
  static std::vector<Tensor<T>> load_list(const Archive& archive, const std::string& name,
                                          int64_t count, const std::vector<Tensor<T>>* like);

  int64_t steps_ = 0;
  const char* method_;  // the name written to "<prefix>/method", e.g. "adam"
};

// ---- Adam -------------------------------------------------------------------------------

struct AdamOptions {
  // α, the step size. Default 1e-3 (Kingma & Ba 2015).
  double learning_rate = 1e-3;
  // β1, decay of the first-moment (mean) estimate, in [0, 1). Default 0.9. Lower values
  // follow the latest gradients more closely; several GAN settings use 0.5 or 0.
  double beta1 = 0.9;
  // β2, decay of the second-moment estimate, in [0, 1). Default 0.999.
  double beta2 = 0.999;
  // ε, added to √v̂ to keep the step finite, > 0 (with 0 a zero gradient would give 0/0).
  // Default 1e-8.
  double epsilon = 1e-8;
  // λ, decoupled weight decay (Loshchilov & Hutter 2019), >= 0: each step also subtracts
  // learning_rate·λ·θ. The paper's Algorithm 2 scales λθ by a schedule multiplier η_t
  // instead; scaling by the learning rate is common practice and keeps one knob per
  // optimiser. Default 0 (off).
  double decoupled_weight_decay = 0;
};

// Adam, Kingma & Ba 2015, Algorithm 1, with t counted from 1:
//   m ← β1 m + (1−β1) g;  v ← β2 v + (1−β2) g²;  m̂ = m/(1−β1^t);  v̂ = v/(1−β2^t)
//   θ ← θ − α m̂/(√v̂ + ε) − α λ θ        (the last term only with decoupled weight decay)
// The bias corrections 1−β^t are computed in double.
template <class T>
class Adam final : public Optimizer<T> {
 public:
  explicit Adam(const AdamOptions& options = {});  // raises kBadArgument naming a bad field
  void step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) override;
  void save(Archive& archive, const std::string& prefix) const override;
  void load(const Archive& archive, const std::string& prefix) override;
  // As constructed, with the learning rate of the latest set_learning_rate or load.
  const AdamOptions& options() const { return options_; }
  double learning_rate() const override { return options_.learning_rate; }

 private:
  void assign_learning_rate(double learning_rate) override {
    options_.learning_rate = learning_rate;
  }
  AdamOptions options_;
  std::vector<Tensor<T>> m_, v_;  // first and second moments, one per parameter
};

// ---- SGD with momentum --------------------------------------------------------------------

struct MomentumSgdOptions {
  // The step size. Default 1e-2.
  double learning_rate = 1e-2;
  // μ, the fraction of the previous velocity kept, in [0, 1). Default 0: plain SGD.
  double momentum = 0;
};

// Stochastic gradient descent with heavy-ball momentum:
//   velocity ← μ·velocity + g;  θ ← θ − lr·velocity
template <class T>
class MomentumSgd final : public Optimizer<T> {
 public:
  explicit MomentumSgd(const MomentumSgdOptions& options = {});
  void step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) override;
  void save(Archive& archive, const std::string& prefix) const override;
  void load(const Archive& archive, const std::string& prefix) override;
  // As constructed, with the learning rate of the latest set_learning_rate or load.
  const MomentumSgdOptions& options() const { return options_; }
  double learning_rate() const override { return options_.learning_rate; }

 private:
  void assign_learning_rate(double learning_rate) override {
    options_.learning_rate = learning_rate;
  }
  MomentumSgdOptions options_;
  std::vector<Tensor<T>> velocity_;
};

// ---- RMSProp ------------------------------------------------------------------------------

struct RmsPropOptions {
  // The step size. Default 1e-3.
  double learning_rate = 1e-3;
  // ρ, decay of the running mean of g², in [0, 1). Default 0.99; lower values adapt faster.
  double decay = 0.99;
  // ε, added to √s to keep the step finite, > 0. Default 1e-8.
  double epsilon = 1e-8;
};

// RMSProp (Tieleman & Hinton 2012), starting from s = 0:
//   s ← ρ s + (1−ρ) g²;  θ ← θ − lr·g/(√s + ε)
template <class T>
class RmsProp final : public Optimizer<T> {
 public:
  explicit RmsProp(const RmsPropOptions& options = {});
  void step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) override;
  void save(Archive& archive, const std::string& prefix) const override;
  void load(const Archive& archive, const std::string& prefix) override;
  // As constructed, with the learning rate of the latest set_learning_rate or load.
  const RmsPropOptions& options() const { return options_; }
  double learning_rate() const override { return options_.learning_rate; }

 private:
  void assign_learning_rate(double learning_rate) override {
    options_.learning_rate = learning_rate;
  }
  RmsPropOptions options_;
  std::vector<Tensor<T>> mean_square_;  // s, one per parameter
};

extern template class Optimizer<float>;
extern template class Optimizer<double>;
extern template class Adam<float>;
extern template class Adam<double>;
extern template class MomentumSgd<float>;
extern template class MomentumSgd<double>;
extern template class RmsProp<float>;
extern template class RmsProp<double>;

}  // namespace spar
