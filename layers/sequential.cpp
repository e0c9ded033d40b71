#include "layers/sequential.h"

#include "engine/error.h"

namespace spar {

template <class T>
Layer<T>& Sequential<T>::add(const std::string& name, std::unique_ptr<Layer<T>> layer) {
  if (name.empty() || name.find('.') != std::string::npos)
    raise(ErrorKind::kBadArgument,
          "sequential: layer name '" + name + "' must be non-empty and free of dots");
  for (const auto& entry : layers_)
    if (entry.first == name)
      raise(ErrorKind::kBadArgument, "sequential: a layer named '" + name + "' already exists");
  layers_.emplace_back(name, std::move(layer));
  return *layers_.back().second;
}

template <class T>
Var<T> Sequential<T>::forward(const Var<T>& x, Context<T>& ctx) {
  Var<T> y = x;
  for (auto& entry : layers_) y = entry.second->forward(y, ctx);
  return y;
}

template <class T>
void Sequential<T>::parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  for (auto& entry : layers_) entry.second->parameters(join_name(prefix, entry.first), out);
}

template <class T>
void Sequential<T>::buffers(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  for (auto& entry : layers_) entry.second->buffers(join_name(prefix, entry.first), out);
}

template <class T>
std::string Sequential<T>::describe() const {
  std::string s;
  for (const auto& entry : layers_)
    s += (s.empty() ? "" : "\n") + entry.first + ": " + entry.second->describe();
  return s;
}

template <class T>
std::vector<NamedTensor<T>> Sequential<T>::named_parameters(const std::string& prefix) {
  std::vector<NamedTensor<T>> out;
  parameters(prefix, out);
  return out;
}

template <class T>
std::vector<NamedTensor<T>> Sequential<T>::named_buffers(const std::string& prefix) {
  std::vector<NamedTensor<T>> out;
  buffers(prefix, out);
  return out;
}

template <class T>
void Sequential<T>::save(Archive& archive, const std::string& prefix) {
  for (const NamedTensor<T>& p : named_parameters(prefix)) archive.put(p.name, *p.tensor);
  for (const NamedTensor<T>& b : named_buffers(prefix)) archive.put(b.name, *b.tensor);
}

template <class T>
void Sequential<T>::load(const Archive& archive, const std::string& prefix) {
  std::vector<NamedTensor<T>> all = named_parameters(prefix);
  for (const NamedTensor<T>& b : named_buffers(prefix)) all.push_back(b);
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

template class Sequential<float>;
template class Sequential<double>;

}  // namespace spar
