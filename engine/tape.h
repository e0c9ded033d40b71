// Var<T> and Tape<T>: reverse-mode differentiation that can differentiate its own backward
// pass.
//
// A Var is a tensor value plus, when it was recorded, its place on a tape. Operations on
// Vars (ops.h) compute their value at once and, when any operand is recorded and recording
// is on, append one node to the operands' tape. Tape::gradient() walks the nodes backwards
// and applies each node's adjoint (vector-Jacobian product). Adjoints are written with the
// same differentiable operations, so with GradientOptions::record the backward pass is
// itself recorded and its results can be differentiated again (gradient penalties, R1,
// Hessian-vector products).
//
// INVARIANTS (each is tested in tests/test_tape.cpp under the same number)
//  1. Append-only: a node is never changed once recorded, and its inputs were recorded
//     before it, so node order is a topological order and the reverse pass is one
//     backwards walk.
//  2. Immutable values: a recorded value (an output, an input, a saved tensor) is never
//     written again; kernels write only into fresh tensors (tensor.h), and optimisers
//     replace parameters instead of writing into them.
//  3. Adjoints accumulate by addition: a node used k times receives the sum of k
//     contributions, added in the reverse order of the uses (deterministic).
//  4. Gradients flow only to recorded Vars. A constant Var (never recorded, or made while
//     recording was off) gets none; gradient() with respect to a constant raises.
//  5. One tape, one generation: clear() ends a generation. Using a Var from an earlier
//     generation, or mixing Vars of two tapes in one operation, raises kBadArgument.
//  6. Memory: clear() releases every recorded tensor to the buffer pool but keeps the node
//     storage, so a loop that records the same work each step stops allocating after its
//     first step (tests/test_memory.cpp measures resident memory over 10,000 steps).
//  7. Threads: a tape and its Vars belong to one thread at a time. Kernels inside an
//     operation may use several threads (parallel.h); the recording itself does not.
//     The no-record switch is per thread.
//  8. Fused adjoints: an adjoint may compute its results with fused kernels when the
//     backward pass is not being recorded (recording_enabled() is false, so its results are
//     constants anyway); when it is recorded, it composes differentiable operations. Both
//     give the same derivative; the second-order checks (gradient_check.h) compare them,
//     since they differentiate the recorded path against differences of the fused one.
#pragma once

#include <cstdint>
#include <memory>
#include <vector>

#include "engine/tensor.h"

namespace spar {

template <class T>
class Tape;

template <class T>
class Var {
 public:
  Var() = default;  // holds no value
  // A constant: a value that is not on any tape (gradients do not flow to it).
  explicit Var(Tensor<T> value) : value_(std::move(value)) {}

  bool has_value() const { return value_.has_value(); }
  const Tensor<T>& value() const { return value_; }
  const Shape& shape() const { return value_.shape(); }
  int64_t element_count() const { return value_.element_count(); }
  T as_scalar() const { return value_.as_scalar(); }
  bool recorded() const { return tape_ != nullptr; }
  Tape<T>* tape() const { return tape_; }
  int32_t id() const { return id_; }

 private:
  friend class Tape<T>;
  Var(Tensor<T> value, Tape<T>* tape, int32_t id, uint32_t generation)
      : value_(std::move(value)), tape_(tape), id_(id), generation_(generation) {}

  Tensor<T> value_;
  Tape<T>* tape_ = nullptr;
  int32_t id_ = -1;
  uint32_t generation_ = 0;
};

// Recording is on by default; a NoRecordScope turns it off on this thread until it ends
// (sampling, optimiser updates, evaluation). Scopes nest.
class NoRecordScope {
 public:
  NoRecordScope();
  ~NoRecordScope();
  NoRecordScope(const NoRecordScope&) = delete;
  NoRecordScope& operator=(const NoRecordScope&) = delete;
};
bool recording_enabled();

namespace detail {
// The recorded nodes and the functions the operations record them with (tape_detail.h, for
// the engine's .cpp files only).
template <class T>
struct Node;
template <class T>
struct TapeAccess;
}  // namespace detail

struct GradientOptions {
  // Record the backward pass on the tape, so the returned gradients are recorded Vars that
  // can be differentiated again. Default false: gradients are constants and the backward
  // pass records nothing (faster, less memory).
  bool record = false;
};

template <class T>
class Tape {
 public:
  Tape();
  ~Tape();
  Tape(const Tape&) = delete;
  Tape& operator=(const Tape&) = delete;

  // Records `value` as a variable that gradients can be taken with respect to.
  Var<T> variable(const Tensor<T>& value);

  // Gradients of the one-element `y` with respect to each of `wrt` (all recorded on this
  // tape), in order. A Var that `y` does not depend on gets zeros of its shape.
  std::vector<Var<T>> gradient(const Var<T>& y, const std::vector<Var<T>>& wrt,
                               GradientOptions options = {});
  // The same for a `y` of any shape, whose adjoint is `seed` (same shape as y): returns
  // seedᵀ·∂y/∂x for each x. gradient(y, wrt) is this with a seed of ones. The seed may itself
  // be recorded; with options.record the result then depends on it.
  std::vector<Var<T>> vector_jacobian_product(const Var<T>& y, const std::vector<Var<T>>& wrt,
                                              const Var<T>& seed, GradientOptions options = {});

  // Ends this generation: releases every recorded tensor, keeps node storage for reuse.
  void clear();

  int64_t size() const { return size_; }  // nodes recorded in this generation

 private:
  friend struct detail::TapeAccess<T>;  // the node-level API of the operations (tape_detail.h)
  static constexpr int kChunkBits = 8;
  static constexpr int64_t kChunkMask = (int64_t{1} << kChunkBits) - 1;
  const detail::Node<T>& node(int64_t id) const;
  detail::Node<T>& mutable_node(int64_t id);
  Var<T> output_of(int64_t id) const;
  // Raises kBadArgument when `v` is from an earlier generation of this tape.
  void check_current(const Var<T>& v, const char* op) const;

  // Nodes live in fixed-size chunks so references stay valid while the backward pass
  // appends (record mode), and so clear() can keep them for the next generation.
  std::vector<std::unique_ptr<detail::Node<T>[]>> chunks_;
  int64_t size_ = 0;
  uint32_t generation_ = 1;
  // Scratch reused by gradient(): adjoints and the "depends on a target" marks.
  std::vector<Var<T>> adjoint_;
  std::vector<char> relevant_;
};

extern template class Tape<float>;
extern template class Tape<double>;

}  // namespace spar
