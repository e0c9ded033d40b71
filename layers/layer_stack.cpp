#include "layers/layer_stack.h"

#include "engine/error.h"

namespace spar {

template <class T>
Layer<T>& LayerStack<T>::add(const std::string& name, std::unique_ptr<Layer<T>> layer) {
  // Neither today's separator nor run format 1's may be part of a name (layer.h).
  if (name.empty() || name.find_first_of(std::string(1, kNameSeparator) + ".") != std::string::npos)
    raise(ErrorKind::kBadArgument, "layer stack: layer name '" + name +
                                       "' must be non-empty and hold no '" + kNameSeparator +
                                       "' or '.'");
  for (const auto& entry : layers_)
    if (entry.first == name)
      raise(ErrorKind::kBadArgument, "layer stack: a layer named '" + name + "' already exists");
  layers_.emplace_back(name, std::move(layer));
  return *layers_.back().second;
}

template <class T>
Var<T> LayerStack<T>::run(const Var<T>& x, Context<T>& ctx) {
  Var<T> y = x;
  for (auto& entry : layers_) y = entry.second->run(y, ctx);
  return y;
}

template <class T>
void LayerStack<T>::collect_parameters(const std::string& prefix,
                                       std::vector<NamedTensor<T>>& out) {
  for (auto& entry : layers_) entry.second->collect_parameters(join_name(prefix, entry.first), out);
}

template <class T>
void LayerStack<T>::collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  for (auto& entry : layers_) entry.second->collect_state(join_name(prefix, entry.first), out);
}

template <class T>
std::string LayerStack<T>::describe() const {
  std::string s;
  for (const auto& entry : layers_)
    s += (s.empty() ? "" : "\n") + entry.first + ": " + entry.second->describe();
  return s;
}

template <class T>
std::vector<NamedTensor<T>> LayerStack<T>::all_parameters(const std::string& prefix) {
  std::vector<NamedTensor<T>> out;
  collect_parameters(prefix, out);
  return out;
}

template <class T>
std::vector<NamedTensor<T>> LayerStack<T>::all_state(const std::string& prefix) {
  std::vector<NamedTensor<T>> out;
  collect_state(prefix, out);
  return out;
}

template <class T>
void LayerStack<T>::save(Archive& archive, const std::string& prefix) {
  for (const NamedTensor<T>& p : all_parameters(prefix)) archive.put(p.name, *p.tensor);
  for (const NamedTensor<T>& b : all_state(prefix)) archive.put(b.name, *b.tensor);
}

template <class T>
void LayerStack<T>::load(const Archive& archive, const std::string& prefix) {
  std::vector<NamedTensor<T>> all = all_parameters(prefix);
  for (const NamedTensor<T>& b : all_state(prefix)) all.push_back(b);
  std::vector<Tensor<T>> loaded;  // checked first, assigned after: all or nothing
  for (const NamedTensor<T>& t : all) {
    if (!archive.contains(t.name))
      raise(ErrorKind::kCorruptCheckpoint,
            archive.source() + ": no tensor '" + t.name + "' (another architecture?)");
    Tensor<T> v = archive.tensor<T>(t.name);
    if (v.shape() != t.tensor->shape())
      raise(ErrorKind::kCorruptCheckpoint, archive.source() + ": tensor '" + t.name +
                                               "' has shape " + v.shape().str() +
                                               ", the model expects " + t.tensor->shape().str());
    loaded.push_back(v);
  }
  for (size_t i = 0; i < all.size(); ++i) *all[i].tensor = loaded[i];
}

template class LayerStack<float>;
template class LayerStack<double>;

}  // namespace spar
