// Writing a file atomically: readers see the old file or the new one, never a part of either.
// Every file spar writes goes through here: checkpoints (archive.h), pictures, plots, logs
// rewritten on resume.
//
// Thread safety: distinct paths may be written from several threads at once; two threads of
// one process must not write the same path at the same time (they would share the temporary
// name).
#pragma once

#include <cstddef>
#include <functional>
#include <string>

namespace spar {

// Writes `size` bytes to `path` atomically: they go to "<path>.tmp-<pid>" in the same folder,
// are flushed and fsync'ed, then renamed over `path`; the folder is then fsync'ed (best
// effort). On any failure the temporary file is removed, an existing file at `path` is left
// as it was, and kIo "<path>: <what>: <strerror>" is raised.
void write_file_atomically(const std::string& path, const void* data, size_t size);

// Receives a file's bytes piece by piece, in order.
using ByteSink = std::function<void(const void*, size_t)>;
// The same for bytes that `produce` hands to its sink piece by piece, in order, so that a
// large file (a checkpoint) is never held in memory whole. An error `produce` raises leaves
// the old file as it was and reaches the caller unchanged.
void write_file_atomically(const std::string& path,
                           const std::function<void(const ByteSink&)>& produce);

}  // namespace spar
