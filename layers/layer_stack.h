// LayerStack<T>: runs named layers in order, lists and names all their parameters and
// state tensors, and saves and loads them through an Archive.
//
// Names are hierarchical: a layer added as "conv1" to a LayerStack reported under prefix
// "critic" owns "critic/conv1/filters" (layer.h). A LayerStack is itself a Layer, so models nest.
// Training versus evaluation is chosen per step by the Context (layer.h).
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "engine/archive.h"
#include "layers/layer.h"

namespace spar {

template <class T>
class LayerStack final : public Layer<T> {
 public:
  LayerStack() = default;
  // Appends `layer` under `name` (unique within this container; raises kBadArgument otherwise).
  // Returns the layer for further set-up.
  Layer<T>& add(const std::string& name, std::unique_ptr<Layer<T>> layer);
  template <class L, class... Args>
  L& emplace(const std::string& name, Args&&... args) {
    return static_cast<L&>(add(name, std::make_unique<L>(std::forward<Args>(args)...)));
  }

  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

  std::vector<NamedTensor<T>> all_parameters(const std::string& prefix = "");
  std::vector<NamedTensor<T>> all_state(const std::string& prefix = "");
  size_t size() const { return layers_.size(); }

  // Writes every parameter and state tensor as a tensor record named "<prefix>/<name>".
  void save(Archive& archive, const std::string& prefix = "");
  // Reads them back. Raises kCorruptCheckpoint naming the tensor when one is missing or has
  // another shape (a checkpoint from another architecture); nothing is changed in that case.
  void load(const Archive& archive, const std::string& prefix = "");

 private:
  std::vector<std::pair<std::string, std::unique_ptr<Layer<T>>>> layers_;
};

extern template class LayerStack<float>;
extern template class LayerStack<double>;

}  // namespace spar
