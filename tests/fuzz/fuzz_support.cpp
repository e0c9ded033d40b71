#include "fuzz_support.h"

#include <unistd.h>
#include <zlib.h>

#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>

#include "engine/archive.h"

#ifdef SPAR_LIBFUZZER
extern "C" size_t LLVMFuzzerMutate(uint8_t* data, size_t size, size_t max_size);
#endif

namespace spar {
namespace fuzz {

void finding(const std::string& what) {
  std::fprintf(stderr, "spar fuzz finding: %s\n", what.c_str());
  std::fflush(stderr);
  std::abort();
}

bool verbose() {
  static const bool on = [] {
    const char* v = std::getenv("SPAR_FUZZ_VERBOSE");
    return v && *v && std::strcmp(v, "0") != 0;
  }();
  return on;
}

namespace {

std::string* made_scratch = nullptr;

void remove_scratch_dir() {
  if (!made_scratch) return;
  std::error_code ignored;
  std::filesystem::remove_all(*made_scratch, ignored);
}

}  // namespace

const std::string& scratch_dir() {
  if (made_scratch) return *made_scratch;
  std::string base;
  const char* tmpdir = std::getenv("TMPDIR");
  std::error_code error;
  if (tmpdir && *tmpdir) {
    base = tmpdir;
  } else if (std::filesystem::is_directory("/dev/shm", error) && ::access("/dev/shm", W_OK) == 0) {
    base = "/dev/shm";
  } else {
    base = "/tmp";
  }
  const std::string path = base + "/spar-fuzz-" + std::to_string(::getpid());
  std::filesystem::create_directories(path, error);
  if (error) finding("cannot make the scratch folder " + path + ": " + error.message());
  made_scratch = new std::string(path);
  std::atexit(remove_scratch_dir);
  return *made_scratch;
}

std::string write_scratch(const std::string& name, const void* data, size_t size) {
  const std::string path = scratch_dir() + "/" + name;
  std::filesystem::create_directories(std::filesystem::path(path).parent_path());
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (!f) finding("cannot write the scratch file " + path);
  if (size > 0 && std::fwrite(data, 1, size, f) != size) finding("short write to " + path);
  if (std::fclose(f) != 0) finding("cannot close " + path);
  return path;
}

void remove_scratch(const std::string& name) {
  std::error_code ignored;
  std::filesystem::remove(scratch_dir() + "/" + name, ignored);
}

void require_unit_range(const Tensor<float>& samples, const char* what) {
  const float* v = samples.data();
  for (int64_t i = 0; i < samples.element_count(); ++i) {
    if (!(v[i] >= -1.0f && v[i] <= 1.0f)) {  // also false for NaN
      finding(std::string(what) + ": sample value " + std::to_string(v[i]) + " at element " +
              std::to_string(i) + " is outside [-1, 1]");
    }
  }
}

std::string gzip(const std::string& bytes) {
  z_stream z{};
  if (deflateInit2(&z, Z_BEST_SPEED, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY) != Z_OK) {
    finding("deflateInit2 failed");
  }
  std::string out(deflateBound(&z, bytes.size()) + 32, '\0');
  z.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(bytes.data()));
  z.avail_in = static_cast<uInt>(bytes.size());
  z.next_out = reinterpret_cast<Bytef*>(&out[0]);
  z.avail_out = static_cast<uInt>(out.size());
  const int rc = deflate(&z, Z_FINISH);
  out.resize(z.total_out);
  deflateEnd(&z);
  if (rc != Z_STREAM_END) finding("deflate did not finish");
  return out;
}

bool gunzip(const std::string& bytes, std::string* out, size_t limit) {
  z_stream z{};
  if (inflateInit2(&z, 15 + 16) != Z_OK) return false;
  z.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(bytes.data()));
  z.avail_in = static_cast<uInt>(bytes.size());
  out->clear();
  char buffer[16384];
  int rc = Z_OK;
  while (rc == Z_OK) {
    z.next_out = reinterpret_cast<Bytef*>(buffer);
    z.avail_out = sizeof buffer;
    rc = inflate(&z, Z_NO_FLUSH);
    out->append(buffer, sizeof buffer - z.avail_out);
    if (out->size() > limit) rc = Z_MEM_ERROR;
    if (rc == Z_OK && z.avail_in == 0 && z.avail_out != 0) rc = Z_BUF_ERROR;  // truncated
  }
  inflateEnd(&z);
  return rc == Z_STREAM_END;
}

namespace {

uint64_t read_le(const uint8_t* p, int bytes) {
  uint64_t v = 0;
  for (int i = bytes - 1; i >= 0; --i) v = (v << 8) | p[i];
  return v;
}

}  // namespace

void fix_archive_crcs(uint8_t* data, size_t size) {
  size_t pos = 24;  // after the header
  while (pos < size) {
    const size_t left = size - pos;
    if (left < 3) return;
    const uint8_t kind = data[pos];
    const size_t name_length = static_cast<size_t>(read_le(data + pos + 1, 2));
    size_t h = 3 + name_length;
    if (kind == 1 || kind == 2) {  // tensors: rank and extents
      if (left < h + 1) return;
      h += 1 + 8 * static_cast<size_t>(data[pos + h]);
    }
    if (left < h + 8) return;
    const uint64_t payload = read_le(data + pos + h, 8);
    if (payload > left - h - 8 || left - h - 8 - payload < 4) return;
    const size_t covered = h + 8 + static_cast<size_t>(payload);
    const uint32_t crc = spar::crc32(data + pos, covered);
    for (int i = 0; i < 4; ++i) data[pos + covered + i] = static_cast<uint8_t>(crc >> (8 * i));
    pos += covered + 4;
  }
}

#ifdef SPAR_LIBFUZZER

size_t mutate_maybe_gzipped(uint8_t* data, size_t size, size_t max_size, unsigned int seed) {
  const bool gzipped = size >= 2 && data[0] == 0x1f && data[1] == 0x8b;
  std::string plain;
  if (gzipped && seed % 4 != 0 &&
      gunzip(std::string(reinterpret_cast<char*>(data), size), &plain, 1 << 20)) {
    // Room to grow: a mutation may lengthen the inflated bytes by up to max_size.
    const size_t length = plain.size();
    plain.resize(length + max_size);
    plain.resize(LLVMFuzzerMutate(reinterpret_cast<uint8_t*>(&plain[0]), length, plain.size()));
    const std::string packed = gzip(plain);
    if (packed.size() <= max_size) {
      std::memcpy(data, packed.data(), packed.size());
      return packed.size();
    }
  }
  return LLVMFuzzerMutate(data, size, max_size);
}

size_t mutate_archive(uint8_t* data, size_t size, size_t max_size, unsigned int seed) {
  size = LLVMFuzzerMutate(data, size, max_size);
  if (seed % 8 != 0) fix_archive_crcs(data, size);
  return size;
}

#endif  // SPAR_LIBFUZZER

}  // namespace fuzz
}  // namespace spar
