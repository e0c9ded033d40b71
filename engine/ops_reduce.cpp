// Reductions and the losses built on them: forward kernels and adjoints, side by side.
#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/ops_detail.h"

namespace spar {
namespace {

using detail::input;

// max and log_sum_exp keep the reduced axis (extent 1) so that g and y broadcast against x.
SPAR_ADJOINT(max_adjoint) {
  gi[0] = multiply(g, detail::constant(n.saved));  // n.saved: 1 at the first maximum
}
SPAR_ADJOINT(log_sum_exp_adjoint) {
  gi[0] = multiply(g, exp(subtract(input(n, 0), y)));  // g·softmax(x)
}

template <class T>
Var<T> drop_axis_unless(const Var<T>& v, int axis, bool keep) {
  return keep ? v : reshape(v, v.shape().without(axis));
}

}  // namespace

template <class T>
Var<T> sum(const Var<T>& x) {
  return sum_into_shape(x, Shape{});
}

template <class T>
Var<T> sum(const Var<T>& x, int axis, bool keep_axis) {
  axis = x.shape().normalise_axis(axis, "sum");
  return drop_axis_unless(sum_into_shape(x, x.shape().with(axis, 1)), axis, keep_axis);
}

template <class T>
Var<T> mean(const Var<T>& x) {
  return scale(sum(x), 1.0 / static_cast<double>(x.element_count()));
}

template <class T>
Var<T> mean(const Var<T>& x, int axis, bool keep_axis) {
  axis = x.shape().normalise_axis(axis, "mean");
  return scale(sum(x, axis, keep_axis), 1.0 / static_cast<double>(x.shape()[axis]));
}

template <class T>
Var<T> max(const Var<T>& x, int axis, bool keep_axis) {
  axis = x.shape().normalise_axis(axis, "max");
  Tensor<T> first_max;
  Tensor<T> value = kernels::max_along(x.value(), axis, &first_max);
  detail::OpArgs args;
  args.axis = axis;
  Var<T> y =
      detail::record<T>("max", max_adjoint<T>, {x}, std::move(value), args, std::move(first_max));
  return drop_axis_unless(y, axis, keep_axis);
}

template <class T>
Var<T> log_sum_exp(const Var<T>& x, int axis, bool keep_axis) {
  axis = x.shape().normalise_axis(axis, "log_sum_exp");
  detail::OpArgs args;
  args.axis = axis;
  Var<T> y = detail::record<T>("log_sum_exp", log_sum_exp_adjoint<T>, {x},
                               kernels::log_sum_exp_along(x.value(), axis), args);
  return drop_axis_unless(y, axis, keep_axis);
}

template <class T>
Var<T> softmax(const Var<T>& x, int axis) {
  return exp(subtract(x, log_sum_exp(x, axis, true)));
}

template <class T>
Var<T> class_cross_entropy(const Var<T>& logits, const Var<T>& targets, int axis) {
  // −Σ t·log softmax(z) = Σ t·(lse(z) − z), exact for any targets, stable through lse.
  return sum(multiply(targets, subtract(log_sum_exp(logits, axis, true), logits)), axis, false);
}

template <class T>
Var<T> logistic_cross_entropy(const Var<T>& logits, const Var<T>& targets) {
  return subtract(softplus(logits), multiply(targets, logits));
}

#define SPAR_INSTANTIATE(T)                                               \
  template Var<T> sum(const Var<T>&);                                     \
  template Var<T> sum(const Var<T>&, int, bool);                          \
  template Var<T> mean(const Var<T>&);                                    \
  template Var<T> mean(const Var<T>&, int, bool);                         \
  template Var<T> max(const Var<T>&, int, bool);                          \
  template Var<T> log_sum_exp(const Var<T>&, int, bool);                  \
  template Var<T> softmax(const Var<T>&, int);                            \
  template Var<T> class_cross_entropy(const Var<T>&, const Var<T>&, int); \
  template Var<T> logistic_cross_entropy(const Var<T>&, const Var<T>&);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
