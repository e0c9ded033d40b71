#include "recipes/idx.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>
#include <zlib.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <limits>

#include "engine/error.h"

namespace spar {

const char* to_string(IdxType type) {
  switch (type) {
    case IdxType::kUnsigned8:
      return "unsigned byte";
    case IdxType::kSigned8:
      return "signed byte";
    case IdxType::kInt16:
      return "int16";
    case IdxType::kInt32:
      return "int32";
    case IdxType::kFloat32:
      return "float32";
    case IdxType::kFloat64:
      return "float64";
  }
  return "unknown";
}

int idx_element_bytes(IdxType type) {
  switch (type) {
    case IdxType::kUnsigned8:
    case IdxType::kSigned8:
      return 1;
    case IdxType::kInt16:
      return 2;
    case IdxType::kInt32:
    case IdxType::kFloat32:
      return 4;
    case IdxType::kFloat64:
      return 8;
  }
  return 0;
}

namespace {

// Deflate (RFC 1951) writes at most 258 bytes per back-reference, and a back-reference costs
// at least one bit for its length code and one for its distance code: one compressed byte
// expands to at most 4 · 258 = 1032 bytes. The gzip header and trailer only lower the ratio.
constexpr int64_t kDeflateMaxExpansion = 1032;
constexpr int64_t kChunkBytes = int64_t{1} << 20;  // read and convert 1 MiB at a time

[[noreturn]] void fail(const std::string& path, const std::string& why) {
  raise(ErrorKind::kBadInputFile, path + ": " + why);
}

std::string hex_byte(unsigned char b) {
  char text[8];
  std::snprintf(text, sizeof text, "%02x", b);
  return text;
}

// The bytes of a file, decompressed on the fly when it starts with the gzip magic 1f 8b.
class ByteSource {
 public:
  explicit ByteSource(const std::string& path) : path_(path) {
    const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd < 0) fail(path, std::string("cannot open: ") + std::strerror(errno));
    struct stat info;
    if (::fstat(fd, &info) != 0 || !S_ISREG(info.st_mode)) {
      ::close(fd);
      fail(path, "not a regular file");
    }
    file_bytes_ = static_cast<int64_t>(info.st_size);
    unsigned char magic[2] = {0, 0};
    compressed_ = ::pread(fd, magic, 2, 0) == 2 && magic[0] == 0x1f && magic[1] == 0x8b;
    file_ = gzdopen(fd, "rb");  // owns fd from here on, also when reading the file plainly
    if (!file_) {
      ::close(fd);
      raise(ErrorKind::kIo, path + ": cannot open: out of memory");
    }
    gzbuffer(file_, 1u << 18);
  }
  ~ByteSource() { gzclose(file_); }
  ByteSource(const ByteSource&) = delete;
  ByteSource& operator=(const ByteSource&) = delete;

  bool compressed() const { return compressed_; }
  int64_t file_bytes() const { return file_bytes_; }

  // Reads up to n bytes; fewer only where the data ends. Raises on damaged gzip data, on a
  // gzip stream that stops before its end marker and checksum (a truncated file), or on a
  // refused read.
  int64_t read(unsigned char* out, int64_t n) {
    int64_t done = 0;
    while (done < n) {
      const int64_t want = n - done < kChunkBytes ? n - done : kChunkBytes;
      const int got = gzread(file_, out + done, static_cast<unsigned>(want));
      if (got < 0) raise_stream_error();
      done += got;
      position_ += got;
      if (got < want) break;
    }
    if (done < n) {
      int code = Z_OK;
      gzerror(file_, &code);
      if (code == Z_BUF_ERROR)
        fail(path_, "truncated: the gzip stream stops after " + std::to_string(position_) +
                        " bytes, before its end marker and checksum");
    }
    return done;
  }

 private:
  [[noreturn]] void raise_stream_error() const {
    int code = Z_OK;
    const char* message = gzerror(file_, &code);
    if (code == Z_ERRNO) raise(ErrorKind::kIo, path_ + ": cannot read: " + std::strerror(errno));
    // zlib prefixes its message with the name it knows the file by ("<fd:3>: ..."): drop it.
    std::string why = message ? message : "unknown zlib error";
    const size_t cut = why.rfind("<fd:", 0) == 0 ? why.find(": ") : std::string::npos;
    if (cut != std::string::npos) why.erase(0, cut + 2);
    fail(path_, "damaged gzip data: " + why);
  }

  std::string path_;
  gzFile file_ = nullptr;
  int64_t file_bytes_ = 0;
  int64_t position_ = 0;  // decompressed bytes read so far
  bool compressed_ = false;
};

struct Header {
  IdxType type = IdxType::kUnsigned8;
  std::vector<int64_t> extents;
  int64_t count = 0;       // product of the extents
  int64_t data_bytes = 0;  // count · element size
  int64_t header_bytes = 0;
};

std::string extents_text(const std::vector<int64_t>& extents) {
  std::string s = "[";
  for (size_t i = 0; i < extents.size(); ++i) s += (i ? ", " : "") + std::to_string(extents[i]);
  return s + "]";
}

Header read_header(ByteSource& in, const std::string& path) {
  Header h;
  unsigned char lead[4] = {0, 0, 0, 0};
  const int64_t got = in.read(lead, 4);
  for (int64_t i = 0; i < got && i < 2; ++i)
    if (lead[i] != 0)
      fail(path, "not an IDX file: it starts with " + hex_byte(lead[0]) +
                     (got > 1 ? " " + hex_byte(lead[1]) : std::string()) + ", not 00 00");
  if (got == 0) fail(path, "empty file, not an IDX file");
  if (got < 4) fail(path, "truncated: the header ends after " + std::to_string(got) + " bytes");
  const unsigned char type = lead[2];
  switch (type) {
    case 0x08:
    case 0x09:
    case 0x0B:
    case 0x0C:
    case 0x0D:
    case 0x0E:
      h.type = static_cast<IdxType>(type);
      break;
    default:
      fail(path, "unknown element type byte 0x" + hex_byte(type) +
                     " (IDX has 08, 09, 0b, 0c, 0d and 0e)");
  }
  const int rank = lead[3];
  std::vector<unsigned char> raw(static_cast<size_t>(4 * rank));
  const int64_t got_extents = in.read(raw.data(), 4 * rank);
  if (got_extents < 4 * rank)
    fail(path, "truncated: the header declares " + std::to_string(rank) +
                   " dimensions but ends after " + std::to_string(got_extents / 4));
  h.header_bytes = 4 + 4 * rank;

  for (int i = 0; i < rank; ++i) {
    const unsigned char* b = &raw[static_cast<size_t>(4 * i)];
    h.extents.push_back((int64_t{b[0]} << 24) | (int64_t{b[1]} << 16) | (int64_t{b[2]} << 8) |
                        int64_t{b[3]});
  }
  // Counted with the engine's overflow-checked count (a zero extent does not excuse absurd
  // others).
  const int64_t element = idx_element_bytes(h.type);
  const int64_t count = checked_element_count(h.extents.data(), h.extents.size());
  if (count < 0)
    fail(path, "the extents " + extents_text(h.extents) + " exceed the limit of " +
                   std::to_string(kMaxElements) +
                   " elements a tensor may have (zero extents aside)");
  h.count = count;
  h.data_bytes = count * element;

  // Lengths against the file before anything is allocated.
  const int64_t size = in.file_bytes();
  if (!in.compressed()) {
    const int64_t follow = size - h.header_bytes;
    if (follow < h.data_bytes)
      fail(path, "truncated: the header declares " + std::to_string(h.data_bytes) + " data bytes " +
                     extents_text(h.extents) + " but only " + std::to_string(follow) + " follow");
    if (follow > h.data_bytes)
      fail(path, std::to_string(follow - h.data_bytes) + " trailing bytes after the " +
                     std::to_string(h.data_bytes) + " data bytes the header declares");
  } else if (h.data_bytes > kDeflateMaxExpansion * size) {
    fail(path, "truncated: the header declares " + std::to_string(h.data_bytes) + " data bytes " +
                   extents_text(h.extents) + ", more than a gzip file of " + std::to_string(size) +
                   " bytes can hold");
  }
  return h;
}

inline uint32_t big_endian_32(const unsigned char* b) {
  return (uint32_t{b[0]} << 24) | (uint32_t{b[1]} << 16) | (uint32_t{b[2]} << 8) | uint32_t{b[3]};
}

// Element i of a chunk of big-endian data of `type`, as double (exact for every IDX type).
inline double decode(IdxType type, const unsigned char* b) {
  switch (type) {
    case IdxType::kUnsigned8:
      return b[0];
    case IdxType::kSigned8:
      return static_cast<int8_t>(b[0]);
    case IdxType::kInt16:
      return static_cast<int16_t>(static_cast<uint16_t>((b[0] << 8) | b[1]));
    case IdxType::kInt32:
      return static_cast<int32_t>(big_endian_32(b));
    case IdxType::kFloat32: {
      const uint32_t bits = big_endian_32(b);
      float f;
      std::memcpy(&f, &bits, sizeof f);
      return f;
    }
    case IdxType::kFloat64: {
      const uint64_t bits = (uint64_t{big_endian_32(b)} << 32) | big_endian_32(b + 4);
      double d;
      std::memcpy(&d, &bits, sizeof d);
      return d;
    }
  }
  return 0;
}

// Reads the data after the header and checks that it ends exactly where the header says.
// The buffer grows only as bytes actually arrive, so a gzip file whose header claims more than
// it holds fails at its end instead of asking for the claimed amount of memory first.
std::vector<unsigned char> read_data(ByteSource& in, const Header& h, const std::string& path) {
  std::vector<unsigned char> bytes;
  // A plain file's length is already checked; for gzip, a guess that seldom needs regrowing.
  const int64_t guess = in.compressed() ? 4 * in.file_bytes() : h.data_bytes;
  bytes.reserve(static_cast<size_t>(h.data_bytes < guess ? h.data_bytes : guess));
  int64_t done = 0;
  while (done < h.data_bytes) {
    const int64_t want = h.data_bytes - done < kChunkBytes ? h.data_bytes - done : kChunkBytes;
    bytes.resize(static_cast<size_t>(done + want));
    const int64_t got = in.read(bytes.data() + done, want);
    done += got;
    if (got < want)
      fail(path, "truncated: the data ends after " + std::to_string(done) + " of the " +
                     std::to_string(h.data_bytes) + " bytes the header declares");
  }
  // One more byte must not exist (for gzip, this also reads through the end marker and
  // checks the CRC-32 and length in the trailer).
  unsigned char extra = 0;
  if (in.read(&extra, 1) != 0)
    fail(path, "trailing bytes after the " + std::to_string(h.data_bytes) +
                   " data bytes the header declares");
  return bytes;
}

}  // namespace

IdxTensor read_idx(const std::string& path) {
  ByteSource in(path);
  const Header h = read_header(in, path);
  if (h.extents.size() > static_cast<size_t>(kMaxRank))
    fail(path, std::to_string(h.extents.size()) + " dimensions; a tensor holds at most " +
                   std::to_string(kMaxRank));
  const std::vector<unsigned char> bytes = read_data(in, h, path);
  IdxTensor out;
  out.type = h.type;
  out.extents = h.extents;
  out.values = Tensor<float>::uninitialised(Shape(h.extents.begin(), h.extents.end()));
  float* dst = out.values.mutable_data();
  const int64_t element = idx_element_bytes(h.type);
  if (h.type == IdxType::kUnsigned8) {
    for (int64_t i = 0; i < h.count; ++i) dst[i] = bytes[static_cast<size_t>(i)];
  } else {
    for (int64_t i = 0; i < h.count; ++i)
      dst[i] = static_cast<float>(decode(h.type, &bytes[static_cast<size_t>(i * element)]));
  }
  return out;
}

IdxIntegers read_idx_integers(const std::string& path) {
  ByteSource in(path);
  const Header h = read_header(in, path);
  if (h.type == IdxType::kFloat32 || h.type == IdxType::kFloat64)
    fail(path, std::string("holds ") + to_string(h.type) + " values; integers were expected");
  IdxIntegers out;
  out.type = h.type;
  out.extents = h.extents;
  const std::vector<unsigned char> bytes = read_data(in, h, path);
  out.values.resize(static_cast<size_t>(h.count));
  const int64_t element = idx_element_bytes(h.type);
  for (int64_t i = 0; i < h.count; ++i)
    out.values[static_cast<size_t>(i)] =
        static_cast<int64_t>(decode(h.type, &bytes[static_cast<size_t>(i * element)]));
  return out;
}

}  // namespace spar
