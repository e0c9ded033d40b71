#include "engine/buffer_pool.h"

#include <mutex>
#include <new>
#include <vector>

#include "engine/check.h"
#include "engine/error.h"

namespace spar {
namespace {

// Four classes per power of two, up to 2^56 bytes: past every tensor Shape allows
// (kMaxElements · 8 bytes = 2^51). A larger request is refused before class_of is asked.
constexpr int kClasses = 4 * 51;
constexpr size_t kMaxBlockBytes = size_t{1} << 56;

// Size class index for `bytes` (>= 1) and the capacity of that class.
int class_of(size_t bytes) {
  if (bytes <= 64) return 0;
  int e =
      63 - __builtin_clzll(static_cast<unsigned long long>(bytes - 1));  // 2^e < bytes <= 2^(e+1)
  size_t base = size_t{1} << e;
  int quarter = static_cast<int>((bytes - 1 - base) / (base / 4));  // 0..3
  return (e - 5) * 4 + quarter;                                     // e >= 6 here
}
size_t capacity_of(int cls) {
  if (cls == 0) return 64;
  int e = cls / 4 + 5, quarter = cls % 4;
  size_t base = size_t{1} << e;
  return base + (quarter + 1) * (base / 4);
}

struct Pool {
  std::mutex mutex;
  std::vector<detail::BlockHeader*> free[kClasses];
  PoolStats stats;
  // The active PoolLimit, if any: bytes in use may not pass limit_in_use.
  bool limited = false;
  int64_t limit_in_use = 0;
  ErrorKind limit_kind = ErrorKind::kBadArgument;
  std::string limit_message;
};

Pool& pool() {
  static Pool* p = new Pool;  // never destroyed: tensors in static objects may outlive main
  return *p;
}

}  // namespace

PoolStats pool_stats() {
  std::lock_guard<std::mutex> lock(pool().mutex);
  return pool().stats;
}

void pool_release_cached() {
  Pool& p = pool();
  std::lock_guard<std::mutex> lock(p.mutex);
  for (int c = 0; c < kClasses; ++c) {
    for (detail::BlockHeader* b : p.free[c]) {
      p.stats.bytes_cached -= static_cast<int64_t>(capacity_of(c));
      ::operator delete(b, std::align_val_t(64));
    }
    p.free[c].clear();
    p.free[c].shrink_to_fit();
  }
}

PoolLimit::PoolLimit(int64_t bytes, ErrorKind kind, std::string message) {
  Pool& p = pool();
  std::lock_guard<std::mutex> lock(p.mutex);
  SPAR_ASSERT(!p.limited, "PoolLimit: one at a time");
  p.limited = true;
  p.limit_in_use = p.stats.bytes_in_use + bytes;
  p.limit_kind = kind;
  p.limit_message = std::move(message);
}

PoolLimit::~PoolLimit() {
  std::lock_guard<std::mutex> lock(pool().mutex);
  pool().limited = false;
}

namespace detail {

BlockHeader* acquire_block(size_t bytes) {
  if (bytes > kMaxBlockBytes) throw std::bad_alloc();
  const int cls = class_of(bytes == 0 ? 1 : bytes);
  size_t cap = capacity_of(cls);
  Pool& p = pool();
  BlockHeader* b = nullptr;
  {
    std::lock_guard<std::mutex> lock(p.mutex);
    if (p.limited && p.stats.bytes_in_use + static_cast<int64_t>(cap) > p.limit_in_use) {
      const ErrorKind kind = p.limit_kind;
      const std::string message = p.limit_message;
      p.limited = false;  // raised once; the owner's scope ends while the error unwinds
      raise(kind, message);
    }
    p.stats.bytes_in_use += static_cast<int64_t>(cap);
    if (!p.free[cls].empty()) {
      b = p.free[cls].back();
      p.free[cls].pop_back();
      p.stats.bytes_cached -= static_cast<int64_t>(cap);
    } else {
      ++p.stats.fresh_allocations;
    }
  }
  if (!b)
    b = static_cast<BlockHeader*>(::operator new(sizeof(BlockHeader) + cap, std::align_val_t(64)));
  b->refs = 1;
  b->size_class = cls;
  return b;
}

void release_block(BlockHeader* block) {
  if (__atomic_sub_fetch(&block->refs, 1, __ATOMIC_ACQ_REL) != 0) return;
  Pool& p = pool();
  int cls = static_cast<int>(block->size_class);
  size_t cap = capacity_of(cls);
  std::lock_guard<std::mutex> lock(p.mutex);
  p.stats.bytes_in_use -= static_cast<int64_t>(cap);
  p.stats.bytes_cached += static_cast<int64_t>(cap);
  p.free[cls].push_back(block);
}

}  // namespace detail
}  // namespace spar
