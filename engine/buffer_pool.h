// The buffer pool: where every tensor's storage comes from.
//
// Tensors of a training step are freed and re-created in the same sizes at the next step.
// The pool keeps freed blocks in size classes (four per power of two, so at most 25% is
// wasted) and hands them out again, so a steady loop stops asking the operating system for
// memory after its first step and large buffers are not re-faulted page by page.
// Blocks are 64-byte aligned (a cache line; enough for AVX-512 loads).
//
// Thread safety: all functions may be called from any thread (one mutex guards the free
// lists; it is taken once per allocation and once per release, never inside kernels).
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>

#include "engine/error.h"

namespace spar {

struct PoolStats {
  int64_t bytes_in_use = 0;       // held by live tensors (rounded up to the size class)
  int64_t bytes_cached = 0;       // freed and kept for reuse
  int64_t fresh_allocations = 0;  // times the pool had to ask the system for memory
};

PoolStats pool_stats();

// Returns every cached block to the system. Live tensors are unaffected.
void pool_release_cached();

// While a PoolLimit lives, an allocation that would take the bytes in use more than `bytes`
// above what they were when it was made raises Error{kind, message}. For building things
// whose size comes from outside (a saved generator's recipe): a hostile size fails at the
// first block past the limit, not after gigabytes and seconds. One at a time per process
// (it counts every thread's allocations); not for use inside kernels.
class PoolLimit {
 public:
  PoolLimit(int64_t bytes, ErrorKind kind, std::string message);
  ~PoolLimit();
  PoolLimit(const PoolLimit&) = delete;
  PoolLimit& operator=(const PoolLimit&) = delete;
};

namespace detail {

// The header in front of each block's data. refs counts the tensors sharing the block.
struct alignas(64) BlockHeader {
  int64_t refs;        // atomic via __atomic builtins; see buffer_pool.cpp
  int64_t size_class;  // index of the size class the block belongs to
};

// Returns a block with room for at least `bytes` bytes of data and refs == 1.
BlockHeader* acquire_block(size_t bytes);
// Drops one reference; the block returns to the pool when the last one goes.
void release_block(BlockHeader* block);
inline void retain_block(BlockHeader* block) {
  __atomic_add_fetch(&block->refs, 1, __ATOMIC_RELAXED);
}
inline void* block_data(BlockHeader* block) {
  return block + 1;
}

}  // namespace detail
}  // namespace spar
