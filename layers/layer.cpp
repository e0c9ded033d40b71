#include "layers/layer.h"

#include <algorithm>

#include "engine/error.h"

namespace spar {

std::string join_name(const std::string& prefix, const std::string& name) {
  return prefix.empty() ? name : prefix + kNameSeparator + name;
}

const char* weight_role(const Shape& weight) {
  return weight.rank() == 2 ? "matrix" : "filters";
}

std::string name_in_format_1(const std::string& old_name, const Shape& shape) {
  // Format 1's roles and theirs now; "weight" depends on the layer (weight_role).
  static const std::pair<const char*, const char*> kRoles[] = {
      {"bias", "offset"},
      {"scale", "scale"},
      {"shift", "shift"},
      {"running_mean", "population_mean"},
      {"running_variance", "population_variance"},
      {"spectral_u", "singular_left"},
      {"spectral_v", "singular_right"},
      {"table", "table"},
  };
  const size_t dot = old_name.rfind('.');
  if (dot == std::string::npos || old_name.find(kNameSeparator) != std::string::npos)
    return old_name;
  const std::string role = old_name.substr(dot + 1);
  std::string path = old_name.substr(0, dot);
  std::replace(path.begin(), path.end(), '.', kNameSeparator);
  if (role == "weight") return join_name(path, weight_role(shape));
  for (const auto& [before, now] : kRoles)
    if (role == before) return join_name(path, now);
  return old_name;
}

template <class T>
Rng& Context<T>::rng(const char* who) {
  if (!rng_)
    raise(ErrorKind::kBadArgument,
          std::string(who) + ": needs a random stream, and the step has none");
  return *rng_;
}

template <class T>
Var<T> Context<T>::use(Tensor<T>& parameter) {
  auto it = bound_.find(&parameter);
  if (it != bound_.end()) return it->second;
  Var<T> v = tape_ ? tape_->variable(parameter) : Var<T>(parameter);
  bound_[&parameter] = v;
  return v;
}

template <class T>
Var<T> Context<T>::variable_of(const Tensor<T>& parameter) const {
  auto it = bound_.find(&parameter);
  return it == bound_.end() ? Var<T>() : it->second;
}

template <class T>
std::vector<Tensor<T>> parameter_gradients(const Var<T>& loss, const Context<T>& ctx,
                                           const std::vector<NamedTensor<T>>& params) {
  std::vector<Var<T>> used;
  std::vector<size_t> where;
  for (size_t i = 0; i < params.size(); ++i) {
    Var<T> v = ctx.variable_of(*params[i].tensor);
    if (v.recorded()) {
      used.push_back(v);
      where.push_back(i);
    }
  }
  std::vector<Tensor<T>> grads(params.size());
  if (!used.empty() && ctx.tape()) {
    std::vector<Var<T>> g = ctx.tape()->gradient(loss, used);
    for (size_t k = 0; k < where.size(); ++k) grads[where[k]] = g[k].value();
  }
  for (size_t i = 0; i < params.size(); ++i)
    if (!grads[i].has_value()) grads[i] = Tensor<T>::zeros(params[i].tensor->shape());
  return grads;
}

template class Context<float>;
template class Context<double>;
template std::vector<Tensor<float>> parameter_gradients(const Var<float>&, const Context<float>&,
                                                        const std::vector<NamedTensor<float>>&);
template std::vector<Tensor<double>> parameter_gradients(const Var<double>&, const Context<double>&,
                                                         const std::vector<NamedTensor<double>>&);

}  // namespace spar
