#include "engine/atomic_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>

#include "engine/error.h"

namespace spar {

void write_file_atomically(const std::string& path, const void* data, size_t size) {
  write_file_atomically(path, [data, size](const ByteSink& sink) {
    if (size > 0) sink(data, size);
  });
}

void write_file_atomically(const std::string& path,
                           const std::function<void(const ByteSink&)>& produce) {
  const std::string tmp = path + ".tmp-" + std::to_string(static_cast<long>(::getpid()));
  auto fail = [&path](const std::string& what, int err) {
    raise(ErrorKind::kIo, path + ": " + what + ": " + std::strerror(err));
  };
  std::FILE* f = std::fopen(tmp.c_str(), "wb");
  if (!f) fail("cannot create temporary file '" + tmp + "'", errno);
  try {
    produce([&](const void* data, size_t size) {
      if (size > 0 && std::fwrite(data, 1, size, f) != size)
        fail("cannot write '" + tmp + "'", errno);
    });
    if (std::fflush(f) != 0) fail("cannot write '" + tmp + "'", errno);
    if (::fsync(::fileno(f)) != 0) fail("cannot sync '" + tmp + "'", errno);
    std::FILE* closing = f;
    f = nullptr;
    if (std::fclose(closing) != 0) fail("cannot close '" + tmp + "'", errno);
    if (std::rename(tmp.c_str(), path.c_str()) != 0)
      fail("cannot rename '" + tmp + "' over it", errno);
  } catch (...) {
    if (f) std::fclose(f);
    std::remove(tmp.c_str());
    throw;
  }
  // Make the rename itself durable. Best effort: some file systems refuse fsync on folders,
  // and the new file is complete and in place either way.
  std::string folder = ".";
  const size_t slash = path.find_last_of('/');
  if (slash != std::string::npos) folder = slash == 0 ? "/" : path.substr(0, slash);
  const int dir = ::open(folder.c_str(), O_RDONLY | O_DIRECTORY);
  if (dir >= 0) {
    (void)::fsync(dir);
    ::close(dir);
  }
}

}  // namespace spar
