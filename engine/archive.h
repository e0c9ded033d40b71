// Archive: an ordered collection of named records (float32 or float64 tensors, int64
// values, UTF-8 text) and spar's own binary file format for it, used for checkpoints.
//
// The layout is documented byte by byte in docs/file-formats.md ("Archive (.spar files)");
// keep the two in step. Every record carries a CRC-32, and the reader checks every length
// against the bytes that remain before it allocates anything, so a truncated or damaged
// file raises kCorruptCheckpoint instead of crashing or asking for absurd amounts of memory.
//
// Storage: put() and tensor() copy tensor data, so an archive never shares storage with
// its caller; changing a tensor in place after put() does not change the archive.
//
// Thread safety: a value type. Concurrent const calls on one Archive are safe; a call that
// modifies an Archive must not run alongside any other call on the same object.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <unordered_map>
#include <vector>

#include "engine/tensor.h"

namespace spar {

// The kind of a record. These values reach disk: never change them, only add new ones.
enum class RecordKind : uint8_t {
  kFloat32Tensor = 1,  // never change
  kFloat64Tensor = 2,  // never change
  kInteger = 3,        // never change: one little-endian int64
  kText = 4,           // never change: UTF-8 bytes, no terminator
};

const char* to_string(RecordKind kind);  // "float32 tensor", "int64", ...

class Archive {
 public:
  // The 8 bytes every archive file starts with, and the format version this code writes.
  // The reader accepts exactly this version (see docs/file-formats.md, versioning policy).
  static constexpr char kMagic[9] = "SPARARCH";  // 8 bytes on disk; the terminator is not written
  static constexpr uint32_t kFormatVersion = 1;

  Archive() = default;

  // Adds a record, or replaces the record of that name in place (keeping its position).
  // Names are 1 to 65535 bytes of valid UTF-8; text must be valid UTF-8. Raises kBadArgument
  // naming the record otherwise, or when the tensor holds no value.
  void put(const std::string& name, const Tensor<float>& value);
  void put(const std::string& name, const Tensor<double>& value);
  void put_int(const std::string& name, int64_t value);
  void put_text(const std::string& name, std::string value);
  // Gives the record `from` the name `to`, keeping its place and content (reading files
  // written under older names). Raises kBadArgument when `from` is missing, or when `to` is
  // taken or not a valid name.
  void rename(const std::string& from, const std::string& to);

  // Readers. Each raises kCorruptCheckpoint "<source>: record '<name>' ..." when the record
  // is missing or holds another kind (a float32 tensor is not converted to double).
  // tensor() returns an independent copy.
  template <class T>
  Tensor<T> tensor(const std::string& name) const;
  int64_t integer(const std::string& name) const;
  const std::string& text(const std::string& name) const;
  // The shape of a tensor record (either element type), without copying its data.
  Shape tensor_shape(const std::string& name) const;

  bool contains(const std::string& name) const { return index_.count(name) != 0; }
  RecordKind kind(const std::string& name) const;  // raises as the readers do when missing
  std::vector<std::string> names() const;          // in insertion order
  size_t size() const { return records_.size(); }

  // Where the records came from: the path or label given to read_file/from_bytes, or
  // "(in memory)". Used in error messages.
  const std::string& source() const { return source_; }

  // The file format. to_bytes() and from_bytes() are exact inverses: every bit of every
  // tensor element (NaN payloads, -0.0) survives. `label` names the bytes in messages.
  std::string to_bytes() const;
  static Archive from_bytes(const std::string& bytes, const std::string& label);

  // The bytes of to_bytes(), streamed to the file with write_file_atomically (atomic_file.h).
  void write_file(const std::string& path) const;
  // Raises kIo when the file cannot be opened or read, kCorruptCheckpoint when it does not
  // pass the reader's checks.
  static Archive read_file(const std::string& path);

 private:
  struct Record {
    RecordKind kind;
    std::string name;
    Tensor<float> f32;    // kFloat32Tensor
    Tensor<double> f64;   // kFloat64Tensor
    int64_t integer = 0;  // kInteger
    std::string text;     // kText
  };

  // Passes the file's bytes, in order and in pieces, to `sink`.
  void emit(const std::function<void(const void*, size_t)>& sink) const;
  Record& slot(const std::string& name);  // the existing record of that name, or a new one
  const Record& find(const std::string& name) const;  // raises when missing

  std::vector<Record> records_;
  std::unordered_map<std::string, size_t> index_;  // name -> position in records_
  std::string source_ = "(in memory)";
};

extern template Tensor<float> Archive::tensor<float>(const std::string&) const;
extern template Tensor<double> Archive::tensor<double>(const std::string&) const;

// True when `s` is well-formed UTF-8 (RFC 3629: no overlong forms, surrogates or values past
// U+10FFFF), the rule for an archive's names and texts.
bool is_valid_utf8(const std::string& s);

// CRC-32 as in IEEE 802.3 (reflected polynomial 0xEDB88320, initial value and final xor
// 0xFFFFFFFF). Pass the previous result as `crc` to continue over more bytes:
// crc32(b, nb, crc32(a, na)) == crc32 of a followed by b. crc32("123456789") == 0xCBF43926.
uint32_t crc32(const void* data, size_t size, uint32_t crc = 0);

}  // namespace spar
