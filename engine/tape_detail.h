// Internal to the engine's .cpp files: the tape's nodes and the node-level API with which
// operations record themselves (record()) and their adjoints read what was recorded. Users
// of the engine see only Var, Tape and the operations (tape.h, ops.h); this header is not
// installed. A test that needs an internal may include it.
#pragma once

#include <array>
#include <cstdint>
#include <vector>

#include "engine/check.h"
#include "engine/conv_geometry.h"
#include "engine/tape.h"

namespace spar {
namespace detail {

// Parameters an operation keeps for its adjoint. Each operation uses the fields it documents.
struct OpArgs {
  double scalar = 0;
  int axis = 0;
  int64_t begin = 0, end = 0;
  bool flag_a = false, flag_b = false;
  std::array<int8_t, kMaxRank> perm{};
  ConvGeometry conv;  // a convolution's stride and padding (ops_conv.cpp)
};

// Computes the adjoints of a node's inputs from the adjoint of its output. `out` is the
// node's output as a recorded Var; grad_in[k] is set only where needs[k] is true.
template <class T>
using AdjointFn = void (*)(const Node<T>& node, const Var<T>& out, const Var<T>& grad_out,
                           const std::vector<bool>& needs, std::vector<Var<T>>& grad_in);

template <class T>
struct Node {
  const char* op = nullptr;        // the operation's name, for messages and verification
  AdjointFn<T> adjoint = nullptr;  // null for variables (leaves)
  std::vector<Var<T>> inputs;      // as seen when recorded (recorded or constant)
  Tensor<T> value;                 // the output
  Tensor<T> saved;                 // extra tensor an adjoint needs (a mask, say), or none
  OpArgs args;
};

// What the operations, and tests of the tape, do below the public API.
template <class T>
struct TapeAccess {
  // Node `id` (0..size()-1) of the current generation.
  static const Node<T>& node(const Tape<T>& tape, int64_t id) { return tape.node(id); }
  // Appends a node and returns its output as a recorded Var (used by record() below).
  static Var<T> append(Tape<T>& tape, const char* op, AdjointFn<T> adjoint,
                       std::vector<Var<T>>&& inputs, Tensor<T> value, const OpArgs& args,
                       Tensor<T> saved);
  // Raises kBadArgument when `v` is from an earlier generation of `tape`.
  static void check_current(const Tape<T>& tape, const Var<T>& v, const char* op) {
    tape.check_current(v, op);
  }
};

// Records one operation. Returns a constant Var when no input is recorded or recording is
// off; otherwise appends a node to the inputs' tape (raising kBadArgument if they are on
// different tapes or from a cleared generation).
template <class T>
Var<T> record(const char* op, AdjointFn<T> adjoint, std::vector<Var<T>> inputs, Tensor<T> value,
              const OpArgs& args = {}, Tensor<T> saved = {});

extern template struct TapeAccess<float>;
extern template struct TapeAccess<double>;

}  // namespace detail
}  // namespace spar
