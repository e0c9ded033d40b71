// Internal to the ops*.cpp files: small helpers shared by operations and their adjoints.
#pragma once

#include <vector>

#include "engine/check.h"
#include "engine/ops.h"
#include "engine/tape_detail.h"

namespace spar {
namespace detail {

template <class T>
Var<T> constant(Tensor<T> t) {
  return Var<T>(std::move(t));
}

template <class T>
const Var<T>& input(const Node<T>& n, int k) {
  SPAR_ASSERT(k >= 0 && static_cast<size_t>(k) < n.inputs.size(),
              "input: the node has no such input");
  return n.inputs[k];
}

inline OpArgs scalar_args(double c) {
  OpArgs a;
  a.scalar = c;
  return a;
}

// The adjoint signature, for brevity in the ops files.
#define SPAR_ADJOINT(name)                                                                     \
  template <class T>                                                                           \
  void name([[maybe_unused]] const detail::Node<T>& n, [[maybe_unused]] const Var<T>& y,       \
            [[maybe_unused]] const Var<T>& g, [[maybe_unused]] const std::vector<bool>& needs, \
            std::vector<Var<T>>& gi)

}  // namespace detail
}  // namespace spar
