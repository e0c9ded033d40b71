// Layer<T>: a parametrised building block made only of engine operations, and Context<T>,
// the per-step binding that turns a layer's parameter tensors into tape variables.
//
// A layer owns its parameters (trained) and state tensors (saved but not trained: running
// statistics, power-iteration vectors) as plain tensors, and reports them with stable,
// hierarchical names ("critic/down2/filters") that checkpoints use. It does not own a
// tape: each forward pass receives a Context that says whether this is a training step and
// where to record. Training versus evaluation is therefore a property of the step (the
// Context), not hidden state in the layers, so one model can serve a training step and a
// sampling call without being switched back and forth.
//
// Thread safety: a layer and a Context belong to one thread at a time.
#pragma once

#include <map>
#include <memory>
#include <string>
#include <vector>

#include "engine/ops.h"
#include "engine/random.h"

namespace spar {

template <class T>
struct NamedTensor {
  std::string name;
  Tensor<T>* tensor;  // owned by the layer; valid while the layer lives
};

template <class T>
class Context {
 public:
  // `tape`: where parameters are recorded (null: nothing is, as when sampling).
  // `training`: use batch statistics, draw dropout masks, advance power iterations.
  // `rng`: the stream dropout draws from (required only by layers that draw).
  Context(Tape<T>* tape, bool training, Rng* rng = nullptr)
      : tape_(tape), training_(training), rng_(rng) {}

  bool training() const { return training_; }
  // A statistics pass (with training false): layers that keep running statistics (batch
  // normalisation) normalise with this batch's statistics and replace their running statistics
  // with them; nothing else changes. Used to fit the statistics to a generator's averaged
  // weights before sampling from them.
  void set_statistics_pass(bool on) { statistics_pass_ = on; }
  bool statistics_pass() const { return statistics_pass_; }
  Tape<T>* tape() const { return tape_; }
  // The stream for random draws; raises kBadArgument naming `who` when none was given.
  Rng& rng(const char* who);

  // The variable standing for `parameter` in this step: recorded on the tape the first time
  // it is used, the same Var afterwards; a constant when there is no tape.
  Var<T> use(Tensor<T>& parameter);
  // Makes `parameter` stand for `v` in this step (gradient checks feed their own variables).
  void bind(Tensor<T>& parameter, const Var<T>& v) { bound_[&parameter] = v; }
  // The variable `parameter` was given in this step, or a Var that holds no value if it was not
  // used.
  Var<T> variable_of(const Tensor<T>& parameter) const;

 private:
  Tape<T>* tape_;
  bool training_;
  bool statistics_pass_ = false;
  Rng* rng_;
  std::map<const Tensor<T>*, Var<T>> bound_;
};

template <class T>
class Layer {
 public:
  virtual ~Layer() = default;
  virtual Var<T> run(const Var<T>& x, Context<T>& ctx) = 0;
  // Appends the trained parameters, named "<prefix>/<name>" (or "<name>" for an empty prefix).
  virtual void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
    (void)prefix;
    (void)out;
  }
  // Appends saved state that is not trained (running statistics, power-iteration vectors).
  virtual void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
    (void)prefix;
    (void)out;
  }
  // One line for people, e.g. "convolution 3→64, 4×4, stride 2, padding 1".
  virtual std::string describe() const = 0;
};

// Names of model tensors (docs/file-formats.md, "Model tensors in an archive"): the path of
// layer names from the network down, then the tensor's role, joined by '/', as
// "critic/down2/filters" or "generator/norm0/population_mean". Roles: "matrix" (a dense layer's
// weight), "filters" (a convolution's), "offset" (a bias), "scale" and "shift" (batch
// normalisation's), "population_mean" and "population_variance" (its statistics for sampling),
// "singular_left" and "singular_right" (spectral normalisation's vectors u and v), "table"
// (a class embedding). These names reach saved files: rename one only with a new run format
// and a mapping from the old names (name_in_format_1).
constexpr char kNameSeparator = '/';
// "<prefix>/<name>", or just the name when the prefix is empty.
std::string join_name(const std::string& prefix, const std::string& name);
// The role of a weight of this shape: "matrix" for rank 2 (dense), "filters" otherwise.
const char* weight_role(const Shape& weight);
// Run format 1 named model tensors by dotted paths with other roles ("critic.down2.weight",
// "generator.norm0.running_mean"); this is the name such a tensor of `shape` has now. Names
// that are not format-1 model tensors come back unchanged.
std::string name_in_format_1(const std::string& old_name, const Shape& shape);

// The gradients of the one-element `loss` with respect to each parameter, in order, as plain
// tensors (zeros for a parameter the step did not use).
template <class T>
std::vector<Tensor<T>> parameter_gradients(const Var<T>& loss, const Context<T>& ctx,
                                           const std::vector<NamedTensor<T>>& params);

extern template class Context<float>;
extern template class Context<double>;

}  // namespace spar
