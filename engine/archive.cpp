#include "engine/archive.h"

#include <sys/stat.h>

#include <array>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <limits>

#include "engine/atomic_file.h"
#include "engine/error.h"

namespace spar {

// The format stores tensor elements as IEEE 754 values in little-endian byte order and
// copies them straight from memory.
static_assert(std::numeric_limits<float>::is_iec559 && std::numeric_limits<double>::is_iec559,
              "spar archives need IEEE 754 float and double");
#if !defined(__BYTE_ORDER__) || __BYTE_ORDER__ != __ORDER_LITTLE_ENDIAN__
#error \
    "spar archives are little-endian; this code copies tensor bytes and needs a little-endian host"
#endif

namespace detail {
namespace {

constexpr std::array<uint32_t, 256> make_crc_table() {
  std::array<uint32_t, 256> table{};
  for (uint32_t i = 0; i < 256; ++i) {
    uint32_t c = i;
    for (int bit = 0; bit < 8; ++bit) c = (c & 1u) ? 0xEDB88320u ^ (c >> 1) : c >> 1;
    table[i] = c;
  }
  return table;
}
constexpr std::array<uint32_t, 256> kCrcTable = make_crc_table();

// Sizes of the fixed parts of the layout (docs/file-formats.md).
constexpr size_t kHeaderBytes = 8 + 4 + 4 + 8;
// The smallest record: kind, name length, a one-byte name, payload length, CRC.
constexpr size_t kMinRecordBytes = 1 + 2 + 1 + 8 + 4;
constexpr size_t kMaxNameBytes = 0xFFFF;

bool is_tensor(RecordKind kind) {
  return kind == RecordKind::kFloat32Tensor || kind == RecordKind::kFloat64Tensor;
}

bool known_kind(uint8_t k) {
  return k >= 1 && k <= 4;
}

bool valid_utf8(const std::string& s) {
  const auto* p = reinterpret_cast<const unsigned char*>(s.data());
  size_t n = s.size(), i = 0;
  while (i < n) {
    unsigned char c = p[i];
    if (c < 0x80) {
      ++i;
      continue;
    }
    size_t len;
    uint32_t cp;
    if (c >= 0xC2 && c <= 0xDF) {
      len = 2;
      cp = c & 0x1F;
    } else if (c >= 0xE0 && c <= 0xEF) {
      len = 3;
      cp = c & 0x0F;
    } else if (c >= 0xF0 && c <= 0xF4) {
      len = 4;
      cp = c & 0x07;
    } else {
      return false;
    }
    if (n - i < len) return false;
    for (size_t k = 1; k < len; ++k) {
      if ((p[i + k] & 0xC0) != 0x80) return false;
      cp = (cp << 6) | (p[i + k] & 0x3F);
    }
    if ((len == 3 && cp < 0x800) || (len == 4 && cp < 0x10000) || cp > 0x10FFFF ||
        (cp >= 0xD800 && cp <= 0xDFFF))
      return false;
    i += len;
  }
  return true;
}

template <class U>
void append_le(std::string& out, U value) {
  static_assert(std::is_unsigned<U>::value, "append_le writes unsigned integers");
  for (size_t b = 0; b < sizeof(U); ++b)
    out.push_back(static_cast<char>((value >> (8 * b)) & 0xFF));
}

std::string hex32(uint32_t v) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "0x%08X", v);
  return buf;
}

// Reads the archive layout from a byte buffer, checking each length before using it.
class Reader {
 public:
  Reader(const std::string& bytes, const std::string& label)
      : p_(reinterpret_cast<const unsigned char*>(bytes.data())),
        size_(bytes.size()),
        label_(label) {}

  size_t pos() const { return pos_; }
  size_t remaining() const { return size_ - pos_; }
  const unsigned char* at(size_t offset) const { return p_ + offset; }

  // Raises "truncated" unless `n` more bytes are there; `what` says what was being read.
  void need(uint64_t n, const std::string& what) const {
    if (n > remaining())
      raise(ErrorKind::kCorruptCheckpoint,
            label_ + ": truncated at byte " + std::to_string(size_) + " (" + what + " needs " +
                std::to_string(n) + " bytes, " + std::to_string(remaining()) + " remain)");
  }
  template <class U>
  U read_le(const std::string& what) {
    need(sizeof(U), what);
    U v = 0;
    for (size_t b = 0; b < sizeof(U); ++b)
      v |= static_cast<U>(static_cast<U>(p_[pos_ + b]) << (8 * b));
    pos_ += sizeof(U);
    return v;
  }
  std::string read_bytes(size_t n, const std::string& what) {
    need(n, what);
    std::string s(reinterpret_cast<const char*>(p_ + pos_), n);
    pos_ += n;
    return s;
  }
  void skip(size_t n) { pos_ += n; }  // after need(n)

 private:
  const unsigned char* p_;
  size_t size_;
  size_t pos_ = 0;
  const std::string& label_;
};

}  // namespace
}  // namespace detail

bool is_valid_utf8(const std::string& s) {
  return detail::valid_utf8(s);
}

uint32_t crc32(const void* data, size_t size, uint32_t crc) {
  const auto* p = static_cast<const unsigned char*>(data);
  uint32_t c = crc ^ 0xFFFFFFFFu;
  for (size_t i = 0; i < size; ++i) c = detail::kCrcTable[(c ^ p[i]) & 0xFFu] ^ (c >> 8);
  return c ^ 0xFFFFFFFFu;
}

const char* to_string(RecordKind kind) {
  switch (kind) {
    case RecordKind::kFloat32Tensor:
      return "float32 tensor";
    case RecordKind::kFloat64Tensor:
      return "float64 tensor";
    case RecordKind::kInteger:
      return "int64";
    case RecordKind::kText:
      return "text";
  }
  return "unknown";
}

// ---- building and querying ----------------------------------------------------------------

Archive::Record& Archive::slot(const std::string& name) {
  if (name.empty() || name.size() > detail::kMaxNameBytes)
    raise(ErrorKind::kBadArgument,
          "archive: record name of " + std::to_string(name.size()) + " bytes (1 to 65535 allowed)");
  if (!detail::valid_utf8(name))
    raise(ErrorKind::kBadArgument, "archive: record name '" + name + "' is not valid UTF-8");
  auto it = index_.find(name);
  if (it != index_.end()) {
    Record& r = records_[it->second];
    r = Record{};
    r.name = name;
    return r;
  }
  index_.emplace(name, records_.size());
  records_.push_back(Record{});
  records_.back().name = name;
  return records_.back();
}

void Archive::rename(const std::string& from, const std::string& to) {
  const auto it = index_.find(from);
  if (it == index_.end())
    raise(ErrorKind::kBadArgument, "archive: cannot rename record '" + from + "': no such record");
  if (from == to) return;
  if (index_.count(to))
    raise(ErrorKind::kBadArgument,
          "archive: cannot rename record '" + from + "' to '" + to + "': that name is taken");
  if (to.empty() || to.size() > detail::kMaxNameBytes || !detail::valid_utf8(to))
    raise(ErrorKind::kBadArgument, "archive: cannot rename record '" + from + "': the new name (" +
                                       std::to_string(to.size()) +
                                       " bytes) is not 1 to 65535 bytes of valid UTF-8");
  const size_t position = it->second;
  index_.erase(it);
  index_.emplace(to, position);
  records_[position].name = to;
}

void Archive::put(const std::string& name, const Tensor<float>& value) {
  if (!value.has_value())
    raise(ErrorKind::kBadArgument, "archive: record '" + name + "': a tensor that holds no value");
  Tensor<float> copy = value.clone();
  Record& r = slot(name);
  r.kind = RecordKind::kFloat32Tensor;
  r.f32 = std::move(copy);
}

void Archive::put(const std::string& name, const Tensor<double>& value) {
  if (!value.has_value())
    raise(ErrorKind::kBadArgument, "archive: record '" + name + "': a tensor that holds no value");
  Tensor<double> copy = value.clone();
  Record& r = slot(name);
  r.kind = RecordKind::kFloat64Tensor;
  r.f64 = std::move(copy);
}

void Archive::put_int(const std::string& name, int64_t value) {
  Record& r = slot(name);
  r.kind = RecordKind::kInteger;
  r.integer = value;
}

void Archive::put_text(const std::string& name, std::string value) {
  if (!detail::valid_utf8(value))
    raise(ErrorKind::kBadArgument, "archive: record '" + name + "': text is not valid UTF-8");
  Record& r = slot(name);
  r.kind = RecordKind::kText;
  r.text = std::move(value);
}

const Archive::Record& Archive::find(const std::string& name) const {
  auto it = index_.find(name);
  if (it == index_.end())
    raise(ErrorKind::kCorruptCheckpoint, source_ + ": record '" + name + "' is missing");
  return records_[it->second];
}

RecordKind Archive::kind(const std::string& name) const {
  return find(name).kind;
}

template <class T>
Tensor<T> Archive::tensor(const std::string& name) const {
  constexpr RecordKind want =
      std::is_same<T, float>::value ? RecordKind::kFloat32Tensor : RecordKind::kFloat64Tensor;
  const Record& r = find(name);
  if (r.kind != want)
    raise(ErrorKind::kCorruptCheckpoint, source_ + ": record '" + name + "' is a " +
                                             to_string(r.kind) + ", expected a " + to_string(want));
  if constexpr (std::is_same<T, float>::value)
    return r.f32.clone();
  else
    return r.f64.clone();
}

template Tensor<float> Archive::tensor<float>(const std::string&) const;
template Tensor<double> Archive::tensor<double>(const std::string&) const;

int64_t Archive::integer(const std::string& name) const {
  const Record& r = find(name);
  if (r.kind != RecordKind::kInteger)
    raise(ErrorKind::kCorruptCheckpoint,
          source_ + ": record '" + name + "' is a " + to_string(r.kind) + ", expected an int64");
  return r.integer;
}

const std::string& Archive::text(const std::string& name) const {
  const Record& r = find(name);
  if (r.kind != RecordKind::kText)
    raise(ErrorKind::kCorruptCheckpoint,
          source_ + ": record '" + name + "' is a " + to_string(r.kind) + ", expected text");
  return r.text;
}

Shape Archive::tensor_shape(const std::string& name) const {
  const Record& r = find(name);
  if (r.kind == RecordKind::kFloat32Tensor) return r.f32.shape();
  if (r.kind == RecordKind::kFloat64Tensor) return r.f64.shape();
  raise(ErrorKind::kCorruptCheckpoint,
        source_ + ": record '" + name + "' is a " + to_string(r.kind) + ", expected a tensor");
}

std::vector<std::string> Archive::names() const {
  std::vector<std::string> out;
  out.reserve(records_.size());
  for (const Record& r : records_) out.push_back(r.name);
  return out;
}

// ---- writing ------------------------------------------------------------------------------

void Archive::emit(const std::function<void(const void*, size_t)>& sink) const {
  std::string head;
  head.append(kMagic, 8);
  detail::append_le<uint32_t>(head, kFormatVersion);
  detail::append_le<uint32_t>(head, 0);  // flags
  detail::append_le<uint64_t>(head, records_.size());
  sink(head.data(), head.size());

  for (const Record& r : records_) {
    const void* payload = nullptr;
    uint64_t payload_bytes = 0;
    int64_t integer = 0;
    head.clear();
    detail::append_le<uint8_t>(head, static_cast<uint8_t>(r.kind));
    detail::append_le<uint16_t>(head, static_cast<uint16_t>(r.name.size()));
    head += r.name;
    if (detail::is_tensor(r.kind)) {
      const Shape& shape = r.kind == RecordKind::kFloat32Tensor ? r.f32.shape() : r.f64.shape();
      detail::append_le<uint8_t>(head, static_cast<uint8_t>(shape.rank()));
      for (int64_t extent : shape) detail::append_le<uint64_t>(head, static_cast<uint64_t>(extent));
      if (r.kind == RecordKind::kFloat32Tensor) {
        payload = r.f32.data();
        payload_bytes = static_cast<uint64_t>(r.f32.element_count()) * sizeof(float);
      } else {
        payload = r.f64.data();
        payload_bytes = static_cast<uint64_t>(r.f64.element_count()) * sizeof(double);
      }
    } else if (r.kind == RecordKind::kInteger) {
      integer = r.integer;  // little-endian host (checked above)
      payload = &integer;
      payload_bytes = sizeof integer;
    } else {
      payload = r.text.data();
      payload_bytes = r.text.size();
    }
    detail::append_le<uint64_t>(head, payload_bytes);
    uint32_t crc = crc32(head.data(), head.size());
    crc = crc32(payload, static_cast<size_t>(payload_bytes), crc);
    sink(head.data(), head.size());
    if (payload_bytes) sink(payload, static_cast<size_t>(payload_bytes));
    std::string tail;
    detail::append_le<uint32_t>(tail, crc);
    sink(tail.data(), tail.size());
  }
}

std::string Archive::to_bytes() const {
  std::string out;
  emit([&out](const void* p, size_t n) { out.append(static_cast<const char*>(p), n); });
  return out;
}

void Archive::write_file(const std::string& path) const {
  write_file_atomically(path, [this](const ByteSink& sink) { emit(sink); });
}

// ---- reading ------------------------------------------------------------------------------

Archive Archive::read_file(const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "rb");
  if (!f) raise(ErrorKind::kIo, path + ": cannot open: " + std::strerror(errno));
  std::string bytes;
  struct stat st;
  if (::fstat(::fileno(f), &st) == 0 && st.st_size > 0)
    bytes.reserve(static_cast<size_t>(st.st_size));
  char buf[1 << 16];
  size_t n;
  while ((n = std::fread(buf, 1, sizeof buf, f)) > 0) bytes.append(buf, n);
  int err = std::ferror(f) ? errno : 0;
  std::fclose(f);
  if (err) raise(ErrorKind::kIo, path + ": cannot read: " + std::strerror(err));
  return from_bytes(bytes, path);
}

Archive Archive::from_bytes(const std::string& bytes, const std::string& label) {
  using detail::Reader;
  const auto corrupt = [&label](const std::string& what) {
    raise(ErrorKind::kCorruptCheckpoint, label + ": " + what);
  };
  Archive archive;
  archive.source_ = label;
  Reader in(bytes, label);

  // The magic first, so a file of another kind is named as such even when it is short.
  if (bytes.size() < 8 || std::memcmp(bytes.data(), kMagic, 8) != 0)
    corrupt("not a spar archive (it does not start with the 8 bytes SPARARCH)");
  in.need(detail::kHeaderBytes, "the header");
  in.skip(8);
  const uint32_t version = in.read_le<uint32_t>("the format version");
  if (version != kFormatVersion)
    corrupt("format version " + std::to_string(version) +
            " is not supported (this build reads version " + std::to_string(kFormatVersion) + ")");
  const uint32_t flags = in.read_le<uint32_t>("the flags");
  if (flags != 0) corrupt("unknown header flags " + detail::hex32(flags));
  const uint64_t count = in.read_le<uint64_t>("the record count");
  if (count > in.remaining() / detail::kMinRecordBytes)
    corrupt("truncated at byte " + std::to_string(bytes.size()) + " (the header claims " +
            std::to_string(count) + " records; " + std::to_string(in.remaining()) +
            " bytes cannot hold them)");

  for (uint64_t i = 0; i < count; ++i) {
    const size_t start = in.pos();
    std::string who = "record #" + std::to_string(i) + " at byte " + std::to_string(start);
    const uint8_t kind_byte = in.read_le<uint8_t>("the kind of " + who);
    if (!detail::known_kind(kind_byte))
      corrupt(who + " has unknown kind " + std::to_string(kind_byte));
    const auto kind = static_cast<RecordKind>(kind_byte);
    const uint16_t name_bytes = in.read_le<uint16_t>("the name length of " + who);
    if (name_bytes == 0) corrupt(who + " has an empty name");
    std::string name = in.read_bytes(name_bytes, "the name of " + who);
    if (!detail::valid_utf8(name)) corrupt(who + " has a name that is not valid UTF-8");
    who = "record '" + name + "'";

    Shape shape;
    int64_t element_count = 0;
    if (detail::is_tensor(kind)) {
      const uint8_t rank = in.read_le<uint8_t>("the rank of " + who);
      if (rank > kMaxRank)
        corrupt(who + " has rank " + std::to_string(rank) + " (at most " +
                std::to_string(kMaxRank) + " allowed)");
      int64_t extents[kMaxRank];
      std::string listed;
      for (int axis = 0; axis < rank; ++axis) {
        const uint64_t extent = in.read_le<uint64_t>("the extents of " + who);
        listed += (axis ? ", " : "") + std::to_string(extent);
        if (extent > static_cast<uint64_t>(kMaxElements))
          corrupt(who + " has extent " + std::to_string(extent) + " on axis " +
                  std::to_string(axis) + " of its shape (at most " + std::to_string(kMaxElements) +
                  ")");
        extents[axis] = static_cast<int64_t>(extent);
      }
      // Counted with overflow checks before anything is built (a zero extent does not excuse
      // absurd others: [2^62, 2, 0] is refused).
      element_count = checked_element_count(extents, rank);
      if (element_count < 0)
        corrupt(who + " has shape [" + listed + "], more than " + std::to_string(kMaxElements) +
                " elements");
      shape = Shape(extents, extents + rank);
    }
    const uint64_t payload_bytes = in.read_le<uint64_t>("the payload length of " + who);
    in.need(payload_bytes, "the payload of " + who);
    const size_t payload_at = in.pos();
    in.skip(static_cast<size_t>(payload_bytes));
    const size_t covered_end = in.pos();
    const uint32_t stored = in.read_le<uint32_t>("the CRC-32 of " + who);
    const uint32_t computed = crc32(in.at(start), covered_end - start);
    if (stored != computed)
      corrupt(who + " fails its CRC-32 check (stored " + detail::hex32(stored) + ", computed " +
              detail::hex32(computed) + ")");
    if (archive.contains(name)) corrupt(who + " appears twice");

    const unsigned char* payload = in.at(payload_at);
    switch (kind) {
      case RecordKind::kFloat32Tensor:
      case RecordKind::kFloat64Tensor: {
        const uint64_t element =
            kind == RecordKind::kFloat32Tensor ? sizeof(float) : sizeof(double);
        // element_count is at most kMaxElements, so this cannot overflow.
        const uint64_t expected = static_cast<uint64_t>(element_count) * element;
        if (expected != payload_bytes)
          corrupt(who + " has shape " + shape.str() + " but a payload of " +
                  std::to_string(payload_bytes) + " bytes");
        if (kind == RecordKind::kFloat32Tensor) {
          auto t = Tensor<float>::uninitialised(shape);
          if (payload_bytes)
            std::memcpy(t.mutable_data(), payload, static_cast<size_t>(payload_bytes));
          Record& r = archive.slot(name);  // not put(): t is ours alone, no copy needed
          r.kind = kind;
          r.f32 = std::move(t);
        } else {
          auto t = Tensor<double>::uninitialised(shape);
          if (payload_bytes)
            std::memcpy(t.mutable_data(), payload, static_cast<size_t>(payload_bytes));
          Record& r = archive.slot(name);  // not put(): t is ours alone, no copy needed
          r.kind = kind;
          r.f64 = std::move(t);
        }
        break;
      }
      case RecordKind::kInteger: {
        if (payload_bytes != sizeof(int64_t))
          corrupt(who + " is an int64 with a payload of " + std::to_string(payload_bytes) +
                  " bytes");
        int64_t value;
        std::memcpy(&value, payload, sizeof value);  // little-endian host (checked above)
        archive.put_int(name, value);
        break;
      }
      case RecordKind::kText: {
        std::string text(reinterpret_cast<const char*>(payload),
                         static_cast<size_t>(payload_bytes));
        if (!detail::valid_utf8(text)) corrupt(who + " holds text that is not valid UTF-8");
        archive.put_text(name, std::move(text));
        break;
      }
    }
  }
  if (in.remaining() != 0)
    corrupt(std::to_string(in.remaining()) +
            " bytes of trailing data after the last record, at byte " + std::to_string(in.pos()));
  return archive;
}

}  // namespace spar
