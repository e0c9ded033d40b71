#include "engine/optimizer.h"

#include <cmath>
#include <cstdio>
#include <string>

#include "engine/error.h"
#include "engine/parallel.h"

namespace spar {
namespace detail {
namespace {

std::string format_double(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.17g", v);
  return buf;
}

void require(bool ok, const char* method, const char* field, double value, const char* range) {
  if (!ok)
    raise(ErrorKind::kBadArgument, std::string(method) + ": " + field + " = " +
                                       format_double(value) + " is outside " + range);
}

void check_fraction(const char* method, const char* field, double value) {
  require(std::isfinite(value) && value >= 0 && value < 1, method, field, value, "[0, 1)");
}

void check_non_negative(const char* method, const char* field, double value) {
  require(std::isfinite(value) && value >= 0, method, field, value, "[0, inf)");
}

void check_positive(const char* method, const char* field, double value) {
  require(std::isfinite(value) && value > 0, method, field, value, "(0, inf)");
}

}  // namespace
}  // namespace detail

namespace {
// The per-element updates, one run of n elements at a time. The constants are members (not
// references into the caller) and the pointers restrict-qualified parameters, so the
// compiler knows no store changes a constant or another array, and vectorises the loops.
template <class T>
struct AdamRun {
  T beta1, keep1, beta2, keep2, correction1, correction2, alpha, epsilon, shrink;
  void operator()(const T* __restrict g, const T* __restrict theta, T* __restrict m,
                  T* __restrict v, T* __restrict out, int64_t n) const {
    for (int64_t k = 0; k < n; ++k) {
      m[k] = beta1 * m[k] + keep1 * g[k];
      v[k] = beta2 * v[k] + keep2 * (g[k] * g[k]);
      const T m_hat = m[k] / correction1;
      const T v_hat = v[k] / correction2;
      out[k] = shrink * theta[k] - alpha * m_hat / (std::sqrt(v_hat) + epsilon);
    }
  }
};

template <class T>
struct MomentumRun {
  T mu, lr;
  void operator()(const T* __restrict g, const T* __restrict theta, T* __restrict velocity,
                  T* __restrict out, int64_t n) const {
    for (int64_t k = 0; k < n; ++k) {
      velocity[k] = mu * velocity[k] + g[k];
      out[k] = theta[k] - lr * velocity[k];
    }
  }
};

template <class T>
struct RmsPropRun {
  T rho, keep, lr, epsilon;
  void operator()(const T* __restrict g, const T* __restrict theta, T* __restrict s,
                  T* __restrict out, int64_t n) const {
    for (int64_t k = 0; k < n; ++k) {
      s[k] = rho * s[k] + keep * (g[k] * g[k]);
      out[k] = theta[k] - lr * g[k] / (std::sqrt(s[k]) + epsilon);
    }
  }
};
}  // namespace

// ---- the common part ----------------------------------------------------------------------

template <class T>
Optimizer<T>::Optimizer(double learning_rate, const char* method) : method_(method) {
  detail::check_non_negative(method_, "learning_rate", learning_rate);
}

template <class T>
void Optimizer<T>::set_learning_rate(double learning_rate) {
  detail::check_non_negative(method_, "learning_rate", learning_rate);
  assign_learning_rate(learning_rate);
}

template <class T>
void Optimizer<T>::check_lists(const std::vector<Tensor<T>*>& params,
                               const std::vector<Tensor<T>>& grads,
                               const std::vector<Tensor<T>>& state) const {
  const std::string op = std::string(method_) + " step";
  if (params.size() != grads.size())
    raise(ErrorKind::kBadShape, op + ": " + std::to_string(params.size()) + " parameters but " +
                                    std::to_string(grads.size()) + " gradients");
  if (!state.empty() && state.size() != params.size())
    raise(ErrorKind::kBadShape, op + ": " + std::to_string(params.size()) +
                                    " parameters given, but the state holds " +
                                    std::to_string(state.size()) + " (the list must not change)");
  for (size_t i = 0; i < params.size(); ++i) {
    const std::string which = op + ": parameter " + std::to_string(i);
    if (params[i] == nullptr || !params[i]->has_value())
      raise(ErrorKind::kBadArgument, which + " is null or holds no value");
    if (!grads[i].has_value())
      raise(ErrorKind::kBadArgument, which + " has a gradient that holds no value");
    const Shape& p = params[i]->shape();
    if (grads[i].shape() != p)
      raise(ErrorKind::kBadShape, which + " has shape " + p.str() + " but its gradient has shape " +
                                      grads[i].shape().str());
    if (!state.empty() && state[i].shape() != p)
      raise(ErrorKind::kBadShape, which + " has shape " + p.str() + " but its state has shape " +
                                      state[i].shape().str() + " (the list must not change)");
  }
}

template <class T>
void Optimizer<T>::init_state(std::vector<Tensor<T>>& state, const std::vector<Tensor<T>>& grads) {
  if (!state.empty()) return;
  state.reserve(grads.size());
  for (const Tensor<T>& g : grads) state.push_back(Tensor<T>::zeros(g.shape()));
}

template <class T>
template <class Update>
void Optimizer<T>::replace_each(const std::vector<Tensor<T>*>& params, Update&& update) {
  std::vector<Tensor<T>> fresh;
  std::vector<int64_t> sizes;
  fresh.reserve(params.size());
  for (const Tensor<T>* p : params) {
    fresh.push_back(Tensor<T>::uninitialised(p->shape()));
    sizes.push_back(p->element_count());
  }
  parallel_for_chunks_of(sizes, [&](size_t i, int64_t begin, int64_t end) {
    update(i, begin, end, fresh[i].mutable_data());
  });
  for (size_t i = 0; i < params.size(); ++i) *params[i] = std::move(fresh[i]);
}

template <class T>
void Optimizer<T>::save_common(Archive& archive, const std::string& prefix, int64_t count) const {
  archive.put_text(prefix + "/method", method_);
  archive.put_int(prefix + "/steps", steps_);
  archive.put(prefix + "/learning_rate", Tensor<double>::scalar(learning_rate()));
  archive.put_int(prefix + "/parameters", count);
}

template <class T>
typename Optimizer<T>::Common Optimizer<T>::read_common(const Archive& archive,
                                                        const std::string& prefix) const {
  const std::string& source = archive.source();
  const std::string method = archive.text(prefix + "/method");
  if (method != method_)
    raise(ErrorKind::kCorruptCheckpoint, source + ": record '" + prefix + "/method' is '" + method +
                                             "', expected '" + method_ + "'");
  Common c;
  c.steps = archive.integer(prefix + "/steps");
  if (c.steps < 0)
    raise(ErrorKind::kCorruptCheckpoint,
          source + ": record '" + prefix + "/steps' is negative (" + std::to_string(c.steps) + ")");
  const Tensor<double> lr = archive.tensor<double>(prefix + "/learning_rate");
  if (lr.element_count() != 1 || !std::isfinite(lr.data()[0]) || lr.data()[0] < 0)
    raise(ErrorKind::kCorruptCheckpoint,
          source + ": record '" + prefix + "/learning_rate' is not one finite value >= 0");
  c.learning_rate = lr.data()[0];
  c.count = archive.integer(prefix + "/parameters");
  // Each parameter has at least one record, so a larger count cannot be honest.
  if (c.count < 0 || static_cast<uint64_t>(c.count) > archive.size())
    raise(ErrorKind::kCorruptCheckpoint, source + ": record '" + prefix + "/parameters' holds " +
                                             std::to_string(c.count) + ", not a parameter count");
  return c;
}

template <class T>
void Optimizer<T>::save_list(Archive& archive, const std::string& name,
                             const std::vector<Tensor<T>>& list) {
  for (size_t i = 0; i < list.size(); ++i) archive.put(name + "/" + std::to_string(i), list[i]);
}

template <class T>
std::vector<Tensor<T>> Optimizer<T>::load_list(const Archive& archive, const std::string& name,
                                               int64_t count, const std::vector<Tensor<T>>* like) {
  std::vector<Tensor<T>> out;
  out.reserve(static_cast<size_t>(count));
  for (int64_t i = 0; i < count; ++i) {
    const std::string record = name + "/" + std::to_string(i);
    out.push_back(archive.tensor<T>(record));  // an independent copy: safe to update in place
    if (like && out.back().shape() != (*like)[static_cast<size_t>(i)].shape())
      raise(ErrorKind::kCorruptCheckpoint,
            archive.source() + ": record '" + record + "' has shape " + out.back().shape().str() +
                ", expected " + (*like)[static_cast<size_t>(i)].shape().str());
  }
  return out;
}

// ---- Adam ---------------------------------------------------------------------------------

template <class T>
Adam<T>::Adam(const AdamOptions& options)
    : Optimizer<T>(options.learning_rate, "adam"), options_(options) {
  detail::check_fraction("adam", "beta1", options.beta1);
  detail::check_fraction("adam", "beta2", options.beta2);
  detail::check_positive("adam", "epsilon", options.epsilon);
  detail::check_non_negative("adam", "decoupled_weight_decay", options.decoupled_weight_decay);
}

template <class T>
void Adam<T>::step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) {
  this->check_lists(params, grads, m_);
  this->init_state(m_, grads);
  this->init_state(v_, grads);

  const double t = static_cast<double>(this->steps_ + 1);
  const double lr = options_.learning_rate;
  AdamRun<T> run;
  run.beta1 = static_cast<T>(options_.beta1);
  run.keep1 = static_cast<T>(1 - options_.beta1);
  run.beta2 = static_cast<T>(options_.beta2);
  run.keep2 = static_cast<T>(1 - options_.beta2);
  // Bias corrections 1 − β^t, in double (Algorithm 1 of Kingma & Ba 2015).
  run.correction1 = static_cast<T>(1 - std::pow(options_.beta1, t));
  run.correction2 = static_cast<T>(1 - std::pow(options_.beta2, t));
  run.alpha = static_cast<T>(lr);
  run.epsilon = static_cast<T>(options_.epsilon);
  // Decoupled weight decay θ − αλθ written as (1 − αλ)θ; exactly θ when λ = 0.
  run.shrink = static_cast<T>(1 - lr * options_.decoupled_weight_decay);
  this->replace_each(params, [&](size_t i, int64_t begin, int64_t end, T* out) {
    run(grads[i].data() + begin, params[i]->data() + begin, m_[i].mutable_data() + begin,
        v_[i].mutable_data() + begin, out + begin, end - begin);
  });
  ++this->steps_;
}

template <class T>
void Adam<T>::save(Archive& archive, const std::string& prefix) const {
  this->save_common(archive, prefix, static_cast<int64_t>(m_.size()));
  this->save_list(archive, prefix + "/m", m_);
  this->save_list(archive, prefix + "/v", v_);
}

template <class T>
void Adam<T>::load(const Archive& archive, const std::string& prefix) {
  const auto common = this->read_common(archive, prefix);
  auto m = this->load_list(archive, prefix + "/m", common.count, nullptr);
  auto v = this->load_list(archive, prefix + "/v", common.count, &m);
  this->commit_common(common);
  m_ = std::move(m);
  v_ = std::move(v);
}

// ---- SGD with momentum --------------------------------------------------------------------

template <class T>
MomentumSgd<T>::MomentumSgd(const MomentumSgdOptions& options)
    : Optimizer<T>(options.learning_rate, "momentum-sgd"), options_(options) {
  detail::check_fraction("momentum-sgd", "momentum", options.momentum);
}

template <class T>
void MomentumSgd<T>::step(const std::vector<Tensor<T>*>& params,
                          const std::vector<Tensor<T>>& grads) {
  this->check_lists(params, grads, velocity_);
  this->init_state(velocity_, grads);
  const MomentumRun<T> run{static_cast<T>(options_.momentum),
                           static_cast<T>(options_.learning_rate)};
  this->replace_each(params, [&](size_t i, int64_t begin, int64_t end, T* out) {
    run(grads[i].data() + begin, params[i]->data() + begin, velocity_[i].mutable_data() + begin,
        out + begin, end - begin);
  });
  ++this->steps_;
}

template <class T>
void MomentumSgd<T>::save(Archive& archive, const std::string& prefix) const {
  this->save_common(archive, prefix, static_cast<int64_t>(velocity_.size()));
  this->save_list(archive, prefix + "/velocity", velocity_);
}

template <class T>
void MomentumSgd<T>::load(const Archive& archive, const std::string& prefix) {
  const auto common = this->read_common(archive, prefix);
  auto velocity = this->load_list(archive, prefix + "/velocity", common.count, nullptr);
  this->commit_common(common);
  velocity_ = std::move(velocity);
}

// ---- RMSProp ------------------------------------------------------------------------------

template <class T>
RmsProp<T>::RmsProp(const RmsPropOptions& options)
    : Optimizer<T>(options.learning_rate, "rmsprop"), options_(options) {
  detail::check_fraction("rmsprop", "decay", options.decay);
  detail::check_positive("rmsprop", "epsilon", options.epsilon);
}

template <class T>
void RmsProp<T>::step(const std::vector<Tensor<T>*>& params, const std::vector<Tensor<T>>& grads) {
  this->check_lists(params, grads, mean_square_);
  this->init_state(mean_square_, grads);
  const RmsPropRun<T> run{static_cast<T>(options_.decay), static_cast<T>(1 - options_.decay),
                          static_cast<T>(options_.learning_rate), static_cast<T>(options_.epsilon)};
  this->replace_each(params, [&](size_t i, int64_t begin, int64_t end, T* out) {
    run(grads[i].data() + begin, params[i]->data() + begin, mean_square_[i].mutable_data() + begin,
        out + begin, end - begin);
  });
  ++this->steps_;
}

template <class T>
void RmsProp<T>::save(Archive& archive, const std::string& prefix) const {
  this->save_common(archive, prefix, static_cast<int64_t>(mean_square_.size()));
  this->save_list(archive, prefix + "/mean_square", mean_square_);
}

template <class T>
void RmsProp<T>::load(const Archive& archive, const std::string& prefix) {
  const auto common = this->read_common(archive, prefix);
  auto mean_square = this->load_list(archive, prefix + "/mean_square", common.count, nullptr);
  this->commit_common(common);
  mean_square_ = std::move(mean_square);
}

template class Optimizer<float>;
template class Optimizer<double>;
template class Adam<float>;
template class Adam<double>;
template class MomentumSgd<float>;
template class MomentumSgd<double>;
template class RmsProp<float>;
template class RmsProp<double>;

}  // namespace spar
