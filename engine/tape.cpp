#include "engine/tape.h"

#include <algorithm>
#include <string>

#include "engine/error.h"
#include "engine/ops.h"
#include "engine/tape_detail.h"

namespace spar {
namespace {
thread_local int no_record_depth = 0;
}  // namespace

NoRecordScope::NoRecordScope() {
  ++no_record_depth;
}
NoRecordScope::~NoRecordScope() {
  --no_record_depth;
}
bool recording_enabled() {
  return no_record_depth == 0;
}

template <class T>
Tape<T>::Tape() = default;
template <class T>
Tape<T>::~Tape() = default;

template <class T>
void Tape<T>::check_current(const Var<T>& v, const char* op) const {
  if (v.generation_ != generation_)
    raise(ErrorKind::kBadArgument,
          std::string(op) + ": a variable recorded before the tape was cleared was used again");
}

template <class T>
const detail::Node<T>& Tape<T>::node(int64_t id) const {
  SPAR_ASSERT(id >= 0 && id < size_, "Tape: node id outside the current generation");
  return chunks_[id >> kChunkBits][id & kChunkMask];
}

template <class T>
detail::Node<T>& Tape<T>::mutable_node(int64_t id) {
  SPAR_ASSERT(id >= 0 && id < size_, "Tape: node id outside the current generation");
  return chunks_[id >> kChunkBits][id & kChunkMask];
}

template <class T>
Var<T> Tape<T>::output_of(int64_t id) const {
  return Var<T>(node(id).value, const_cast<Tape<T>*>(this), static_cast<int32_t>(id), generation_);
}

namespace detail {
template <class T>
Var<T> TapeAccess<T>::append(Tape<T>& tape, const char* op, AdjointFn<T> adjoint,
                             std::vector<Var<T>>&& inputs, Tensor<T> value, const OpArgs& args,
                             Tensor<T> saved) {
  if (tape.size_ >= (int64_t{1} << 31) - 1)
    raise(ErrorKind::kBadArgument, std::string(op) + ": tape is full");
  if ((tape.size_ >> Tape<T>::kChunkBits) == static_cast<int64_t>(tape.chunks_.size()))
    tape.chunks_.emplace_back(new Node<T>[size_t{1} << Tape<T>::kChunkBits]);
  const int64_t id = tape.size_++;
  Node<T>& n = tape.mutable_node(id);
  n.op = op;
  n.adjoint = adjoint;
  n.inputs.swap(inputs);  // the node's old (cleared) vector goes back to the caller: no churn
  n.value = std::move(value);
  n.saved = std::move(saved);
  n.args = args;
  return tape.output_of(id);
}
}  // namespace detail

template <class T>
Var<T> Tape<T>::variable(const Tensor<T>& value) {
  if (!value.has_value()) raise(ErrorKind::kBadArgument, "variable: the tensor holds no value");
  return detail::TapeAccess<T>::append(*this, "variable", nullptr, {}, value, detail::OpArgs{},
                                       Tensor<T>{});
}

template <class T>
void Tape<T>::clear() {
  for (int64_t i = 0; i < size_; ++i) {
    detail::Node<T>& n = mutable_node(i);
    n.inputs.clear();  // keeps capacity
    n.value = Tensor<T>();
    n.saved = Tensor<T>();
  }
  size_ = 0;
  ++generation_;
}

template <class T>
std::vector<Var<T>> Tape<T>::gradient(const Var<T>& y, const std::vector<Var<T>>& wrt,
                                      GradientOptions options) {
  if (y.element_count() != 1)
    raise(ErrorKind::kBadShape,
          "gradient: the differentiated value has shape " + y.shape().str() + ", not one element");
  return vector_jacobian_product(y, wrt, Var<T>(Tensor<T>::full(y.shape(), T(1))), options);
}

template <class T>
std::vector<Var<T>> Tape<T>::vector_jacobian_product(const Var<T>& y,
                                                     const std::vector<Var<T>>& wrt,
                                                     const Var<T>& seed, GradientOptions options) {
  for (const Var<T>& x : wrt) {
    if (x.tape_ != this)
      raise(ErrorKind::kBadArgument, "gradient: a target is not recorded on this tape");
    check_current(x, "gradient");
  }
  if (seed.shape() != y.shape())
    raise(ErrorKind::kBadShape, "gradient: seed of shape " + seed.shape().str() +
                                    " for a value of shape " + y.shape().str());
  std::vector<Var<T>> result;
  result.reserve(wrt.size());
  if (y.tape_ != this) {  // y is a constant: it depends on nothing
    for (const Var<T>& x : wrt) result.emplace_back(Tensor<T>::zeros(x.shape()));
    return result;
  }
  check_current(y, "gradient");
  if (options.record && !recording_enabled())
    raise(ErrorKind::kBadArgument, "gradient: record requested inside a NoRecordScope");

  const int64_t n = y.id_ + 1;
  // relevant_[i]: 2 for a target, 1 for a node that depends on a target (so its adjoint
  // is needed), 0 otherwise. Invariant 1 makes this one forward sweep.
  enum : char { kIrrelevant = 0, kDependent = 1, kTarget = 2 };
  relevant_.assign(n, kIrrelevant);
  int64_t first = n;
  for (const Var<T>& x : wrt)
    if (x.id_ < n) {
      relevant_[x.id_] = kTarget;
      first = std::min<int64_t>(first, x.id_);
    }
  for (int64_t i = first + 1; i < n; ++i) {
    if (relevant_[i]) continue;
    for (const Var<T>& in : node(i).inputs)
      if (in.tape_ == this && relevant_[in.id_]) {
        relevant_[i] = kDependent;
        break;
      }
  }
  adjoint_.assign(n, Var<T>());
  adjoint_[y.id_] = seed;
  std::unique_ptr<NoRecordScope> no_record;
  if (!options.record) no_record.reset(new NoRecordScope);

  std::vector<bool> needs;
  std::vector<Var<T>> grad_in;
  for (int64_t i = y.id_; i >= first; --i) {
    if (!relevant_[i] || !adjoint_[i].has_value()) continue;
    const detail::Node<T>& nd = node(i);  // stays valid while appending: chunked storage
    if (nd.adjoint) {
      const size_t k = nd.inputs.size();
      needs.assign(k, false);
      bool any = false;
      for (size_t j = 0; j < k; ++j) {
        const Var<T>& in = nd.inputs[j];
        needs[j] = in.tape_ == this && relevant_[in.id_];
        any = any || needs[j];
      }
      if (any) {
        grad_in.assign(k, Var<T>());
        nd.adjoint(nd, output_of(i), adjoint_[i], needs, grad_in);
        for (size_t j = 0; j < k; ++j) {
          if (!needs[j] || !grad_in[j].has_value()) continue;
          Var<T>& acc = adjoint_[nd.inputs[j].id_];
          acc = acc.has_value() ? add(acc, grad_in[j]) : grad_in[j];  // invariant 3
        }
      }
    }
    if (relevant_[i] != kTarget) adjoint_[i] = Var<T>();  // release early
  }
  for (const Var<T>& x : wrt) {
    if (x.id_ < n && adjoint_[x.id_].has_value())
      result.push_back(adjoint_[x.id_]);
    else
      result.emplace_back(Tensor<T>::zeros(x.shape()));
  }
  adjoint_.clear();
  return result;
}

namespace detail {
template <class T>
Var<T> record(const char* op, AdjointFn<T> adjoint, std::vector<Var<T>> inputs, Tensor<T> value,
              const OpArgs& args, Tensor<T> saved) {
  Tape<T>* tape = nullptr;
  for (const Var<T>& in : inputs) {
    if (!in.has_value())
      raise(ErrorKind::kBadArgument, std::string(op) + ": an operand holds no value");
    if (!in.recorded()) continue;
    if (tape && in.tape() != tape)
      raise(ErrorKind::kBadArgument,
            std::string(op) + ": operands are recorded on different tapes");
    tape = in.tape();
    TapeAccess<T>::check_current(*tape, in, op);
  }
  if (!tape || !recording_enabled()) return Var<T>(std::move(value));
  return TapeAccess<T>::append(*tape, op, adjoint, std::move(inputs), std::move(value), args,
                               std::move(saved));
}

template struct TapeAccess<float>;
template struct TapeAccess<double>;
template Var<float> record(const char*, AdjointFn<float>, std::vector<Var<float>>, Tensor<float>,
                           const OpArgs&, Tensor<float>);
template Var<double> record(const char*, AdjointFn<double>, std::vector<Var<double>>,
                            Tensor<double>, const OpArgs&, Tensor<double>);
}  // namespace detail

template class Tape<float>;
template class Tape<double>;

}  // namespace spar
