// Tests of engine/archive.h: the record collection, the file layout documented in
// docs/file-formats.md, CRC-32, the reader's defences and reading and writing files.
#include <dirent.h>
#include <sys/stat.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <limits>
#include <sstream>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "engine/error.h"
#include "engine/tensor.h"
#include "tests/support.h"

namespace {

using spar::testing::error_kind_of;
using spar::testing::folder_entries;
using spar::testing::new_temp_folder;
using spar::testing::read_bytes;

using spar::Archive;
using spar::ErrorKind;
using spar::Shape;
using spar::Tensor;

// CRC-32 computed bit by bit straight from its definition (reflected polynomial 0xEDB88320,
// initial value and final xor 0xFFFFFFFF), sharing no code with the table-driven one.
uint32_t crc32_bitwise(const std::string& bytes) {
  uint32_t c = 0xFFFFFFFFu;
  for (unsigned char byte : bytes) {
    c ^= byte;
    for (int k = 0; k < 8; ++k) c = (c >> 1) ^ (0xEDB88320u & (0u - (c & 1u)));
  }
  return ~c;
}

// splitmix64, for arbitrary bit patterns (many of them NaNs with payloads and subnormals).
uint64_t next_bits(uint64_t& state) {
  uint64_t z = (state += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

template <class T>
Tensor<T> random_bits_tensor(const Shape& shape, uint64_t seed) {
  Tensor<T> t = Tensor<T>::uninitialised(shape);
  auto* bytes = reinterpret_cast<unsigned char*>(t.mutable_data());
  for (size_t i = 0; i < static_cast<size_t>(t.element_count()) * sizeof(T); ++i)
    bytes[i] = static_cast<unsigned char>(next_bits(seed));
  return t;
}

template <class T>
bool same_bits(const Tensor<T>& a, const Tensor<T>& b) {
  return a.shape() == b.shape() &&
         std::memcmp(a.data(), b.data(), static_cast<size_t>(a.element_count()) * sizeof(T)) == 0;
}

// Little-endian field writers for building files by hand from docs/file-formats.md.
void le(std::string& out, uint64_t value, int bytes) {
  for (int b = 0; b < bytes; ++b) out.push_back(static_cast<char>((value >> (8 * b)) & 0xFF));
}
std::string header(uint64_t count) {
  std::string h = "SPARARCH";
  le(h, 1, 4);  // format version
  le(h, 0, 4);  // flags
  le(h, count, 8);
  return h;
}
// One record: the covered bytes followed by their CRC-32 (computed bit by bit).
std::string record(const std::string& covered) {
  std::string r = covered;
  le(r, crc32_bitwise(covered), 4);
  return r;
}

// A small archive with one record of every kind.
Archive small_archive() {
  Archive a;
  a.put("w", Tensor<float>::from_values(Shape{2, 2}, {1.5f, -0.0f, 3.0f, -4.25f}));
  a.put("step", Tensor<double>::scalar(0.125));
  a.put_int("n", -7);
  a.put_text("note", "ok");
  return a;
}

}  // namespace

TEST_CASE("crc32 matches the standard check value and a bit-by-bit computation", "[archive]") {
  // Check value of CRC-32 (IEEE 802.3, reflected 0xEDB88320) for the ASCII bytes
  // "123456789": 0xCBF43926, as listed in catalogues of CRC parameters (common practice).
  const std::string check = "123456789";
  CHECK(spar::crc32(check.data(), check.size()) == 0xCBF43926u);
  CHECK(crc32_bitwise(check) == 0xCBF43926u);
  // Second known answer (from memory; confirmed with Python's zlib.crc32).
  const std::string fox = "The quick brown fox jumps over the lazy dog";
  CHECK(spar::crc32(fox.data(), fox.size()) == 0x414FA339u);
  CHECK(spar::crc32("", 0) == 0u);

  // Table-driven equals bit-by-bit on arbitrary data, and chaining equals one pass.
  uint64_t seed = 42;
  for (size_t n : {1u, 7u, 64u, 1000u}) {
    std::string data;
    for (size_t i = 0; i < n; ++i) data.push_back(static_cast<char>(next_bits(seed)));
    const uint32_t whole = spar::crc32(data.data(), data.size());
    CHECK(whole == crc32_bitwise(data));
    const size_t cut = n / 3;
    CHECK(spar::crc32(data.data() + cut, n - cut, spar::crc32(data.data(), cut)) == whole);
  }
}

TEST_CASE("archive bytes follow the documented layout exactly", "[archive]") {
  // Built by hand from docs/file-formats.md, "Archive (.spar files)".
  Archive a;
  a.put("ab", Tensor<float>::from_values(Shape{2, 1}, {1.0f, -2.0f}));
  a.put_int("k", 258);
  a.put_text("t", "hi");

  std::string expected = header(3);
  std::string covered;
  le(covered, 1, 1);  // kind: float32 tensor
  le(covered, 2, 2);
  covered += "ab";
  le(covered, 2, 1);  // rank
  le(covered, 2, 8);
  le(covered, 1, 8);
  le(covered, 8, 8);            // payload bytes
  le(covered, 0x3F800000u, 4);  // 1.0f (IEEE 754 binary32)
  le(covered, 0xC0000000u, 4);  // -2.0f
  expected += record(covered);
  covered.clear();
  le(covered, 3, 1);  // kind: int64
  le(covered, 1, 2);
  covered += "k";
  le(covered, 8, 8);
  le(covered, 258, 8);
  expected += record(covered);
  covered.clear();
  le(covered, 4, 1);  // kind: text
  le(covered, 1, 2);
  covered += "t";
  le(covered, 2, 8);
  covered += "hi";
  expected += record(covered);

  CHECK(a.to_bytes() == expected);
  const Archive b = Archive::from_bytes(expected, "hand-built");
  CHECK(b.names() == std::vector<std::string>{"ab", "k", "t"});
  CHECK(b.integer("k") == 258);
  CHECK(b.text("t") == "hi");
  CHECK(b.tensor<float>("ab").to_vector() == std::vector<float>{1.0f, -2.0f});
}

TEST_CASE("a one-record archive equals bytes produced outside the project", "[archive]") {
  // Produced with Python: b"SPARARCH" + struct.pack("<IIQ", 1, 0, 1), then the record
  // struct.pack("<BH", 3, 1) + b"k" + struct.pack("<Qq", 8, 258) followed by
  // struct.pack("<I", zlib.crc32(record)). Also shown in docs/file-formats.md.
  const unsigned char expected[] = {0x53, 0x50, 0x41, 0x52, 0x41, 0x52, 0x43, 0x48, 0x01, 0x00,
                                    0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x01, 0x00, 0x00, 0x00,
                                    0x00, 0x00, 0x00, 0x00, 0x03, 0x01, 0x00, 0x6b, 0x08, 0x00,
                                    0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x02, 0x01, 0x00, 0x00,
                                    0x00, 0x00, 0x00, 0x00, 0x8d, 0x86, 0xb0, 0x26};
  Archive a;
  a.put_int("k", 258);
  CHECK(a.to_bytes() == std::string(reinterpret_cast<const char*>(expected), sizeof expected));
}

TEST_CASE("archive round trip keeps every record and every bit", "[archive]") {
  Archive a;
  const std::vector<Shape> shapes = {Shape{},
                                     Shape{5},
                                     Shape{3, 4},
                                     Shape{2, 3, 5},
                                     Shape{2, 1, 3, 2},
                                     Shape{3, 0, 2},
                                     Shape{1, 2, 1, 2, 1, 2}};
  uint64_t seed = 1;
  for (size_t i = 0; i < shapes.size(); ++i) {
    a.put("f/" + std::to_string(i), random_bits_tensor<float>(shapes[i], seed++));
    a.put("d/" + std::to_string(i), random_bits_tensor<double>(shapes[i], seed++));
  }
  // Values that must keep their exact bits: NaNs with payloads (quiet and signalling),
  // -0.0, infinities, the smallest subnormal.
  const uint32_t f_bits[] = {0x7FC01234u, 0xFFA00001u, 0x80000000u,
                             0x7F800000u, 0xFF800000u, 0x00000001u};
  const uint64_t d_bits[] = {0x7FF80000000ABCDEull, 0x7FF0000000000001ull, 0x8000000000000000ull,
                             0xFFF0000000000000ull, 0x0000000000000001ull, 0xFFFFFFFFFFFFFFFFull};
  Tensor<float> special_f = Tensor<float>::uninitialised(Shape{6});
  Tensor<double> special_d = Tensor<double>::uninitialised(Shape{6});
  std::memcpy(special_f.mutable_data(), f_bits, sizeof f_bits);
  std::memcpy(special_d.mutable_data(), d_bits, sizeof d_bits);
  a.put("special_f", special_f);
  a.put("special_d", special_d);
  a.put_int("min", std::numeric_limits<int64_t>::min());
  a.put_int("max", std::numeric_limits<int64_t>::max());
  a.put_int("minus_one", -1);
  a.put_text("empty", "");
  a.put_text("utf8", "θ ← θ − α·m̂/(√v̂ + ε) ✓ 𝔼");
  a.put_text("nul", std::string("a\0b", 3));

  const std::string folder = new_temp_folder("spar-archive-test");
  const std::string path = folder + "/round.spar";
  a.write_file(path);
  const Archive from_file = Archive::read_file(path);
  const Archive from_memory = Archive::from_bytes(a.to_bytes(), "memory");
  CHECK(from_file.source() == path);

  for (const Archive* b : {&from_file, &from_memory}) {
    REQUIRE(b->names() == a.names());
    for (const std::string& name : a.names()) {
      INFO(name);
      REQUIRE(b->kind(name) == a.kind(name));
      switch (a.kind(name)) {
        case spar::RecordKind::kFloat32Tensor:
          CHECK(same_bits(b->tensor<float>(name), a.tensor<float>(name)));
          break;
        case spar::RecordKind::kFloat64Tensor:
          CHECK(same_bits(b->tensor<double>(name), a.tensor<double>(name)));
          break;
        case spar::RecordKind::kInteger:
          CHECK(b->integer(name) == a.integer(name));
          break;
        case spar::RecordKind::kText:
          CHECK(b->text(name) == a.text(name));
          break;
      }
    }
    CHECK(b->to_bytes() == a.to_bytes());
  }
  CHECK(a.integer("min") == std::numeric_limits<int64_t>::min());
  CHECK(a.text("nul").size() == 3);
  CHECK(std::memcmp(from_file.tensor<float>("special_f").data(), f_bits, sizeof f_bits) == 0);
  CHECK(std::memcmp(from_file.tensor<double>("special_d").data(), d_bits, sizeof d_bits) == 0);
  std::remove(path.c_str());
  rmdir(folder.c_str());
}

TEST_CASE("archive records: replace in place, copies, kinds and names", "[archive]") {
  Archive a;
  a.put_int("x", 1);
  a.put_text("y", "first");
  a.put("x", Tensor<double>::scalar(2.5));  // replaces, keeping the position
  CHECK(a.names() == std::vector<std::string>{"x", "y"});
  CHECK(a.kind("x") == spar::RecordKind::kFloat64Tensor);
  CHECK(a.tensor<double>("x").as_scalar() == 2.5);

  // put() copies: changing the caller's tensor afterwards does not change the record.
  Tensor<float> t = Tensor<float>::full(Shape{3}, 1.0f);
  a.put("t", t);
  t.mutable_data()[0] = 9.0f;
  CHECK(a.tensor<float>("t").to_vector() == std::vector<float>{1.0f, 1.0f, 1.0f});
  // tensor() returns a copy too.
  Tensor<float> out = a.tensor<float>("t");
  out.mutable_data()[1] = 9.0f;
  CHECK(a.tensor<float>("t").to_vector() == std::vector<float>{1.0f, 1.0f, 1.0f});

  std::string message;
  CHECK(error_kind_of([&] { a.tensor<float>("x"); }, &message) == ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("'x'") != std::string::npos);
  CHECK(error_kind_of([&] { a.integer("missing"); }, &message) == ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("'missing'") != std::string::npos);
  CHECK(error_kind_of([&] { a.text("x"); }) == ErrorKind::kCorruptCheckpoint);
  CHECK_FALSE(a.contains("missing"));
  CHECK(a.contains("y"));

  CHECK(error_kind_of([&] { a.put_int("", 1); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { a.put_int(std::string(65536, 'n'), 1); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { a.put_text("bad", "\xC3\x28"); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { a.put_text("\xED\xA0\x80", "surrogate"); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { a.put("u", Tensor<float>()); }) == ErrorKind::kBadArgument);
  a.put_int(std::string(65535, 'n'), 1);  // the longest name allowed
  CHECK(Archive::from_bytes(a.to_bytes(), "long").integer(std::string(65535, 'n')) == 1);
}

TEST_CASE("rename keeps a record's place and content and refuses taken or bad names", "[archive]") {
  Archive a;
  a.put_int("first", 1);
  a.put("old", Tensor<float>::full(Shape{2}, 3.0f));
  a.put_text("last", "z");
  a.rename("old", "new");
  CHECK(a.names() == std::vector<std::string>{"first", "new", "last"});
  CHECK_FALSE(a.contains("old"));
  CHECK(a.tensor<float>("new").to_vector() == std::vector<float>{3.0f, 3.0f});
  const Archive back = Archive::from_bytes(a.to_bytes(), "renamed");
  CHECK(back.names() == std::vector<std::string>{"first", "new", "last"});
  a.rename("new", "new");  // to itself: nothing changes
  CHECK(a.names() == std::vector<std::string>{"first", "new", "last"});
  std::string message;
  CHECK(error_kind_of([&] { a.rename("absent", "x"); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find("'absent'") != std::string::npos);
  CHECK(error_kind_of([&] { a.rename("new", "last"); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find("taken") != std::string::npos);
  CHECK(error_kind_of([&] { a.rename("new", ""); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { a.rename("new", "\xC3\x28"); }) == ErrorKind::kBadArgument);
  CHECK(a.names() == std::vector<std::string>{"first", "new", "last"});  // refusals change nothing
}

TEST_CASE("a truncated archive raises kCorruptCheckpoint at every length", "[archive]") {
  Archive a = small_archive();
  a.put("big", Tensor<double>::full(Shape{4, 3}, 0.5));
  const std::string bytes = a.to_bytes();
  const spar::PoolStats before = spar::pool_stats();
  for (size_t len = 0; len < bytes.size(); ++len) {
    INFO("length " << len);
    std::string message;
    CHECK(error_kind_of([&] { Archive::from_bytes(bytes.substr(0, len), "cut.spar"); }, &message) ==
          ErrorKind::kCorruptCheckpoint);
    CHECK(message.rfind("cut.spar: ", 0) == 0);
  }
  // Whatever the failed reads allocated has gone back to the pool.
  CHECK(spar::pool_stats().bytes_in_use == before.bytes_in_use);
}

TEST_CASE("every single-byte change in a small archive is detected", "[archive]") {
  const std::string bytes = small_archive().to_bytes();
  REQUIRE(Archive::from_bytes(bytes, "intact").size() == 4);
  int detected = 0, tried = 0;
  for (size_t pos = 0; pos < bytes.size(); ++pos) {
    for (int mask = 1; mask < 256; ++mask) {
      std::string damaged = bytes;
      damaged[pos] = static_cast<char>(damaged[pos] ^ mask);
      ++tried;
      try {
        Archive::from_bytes(damaged, "flip");
        FAIL_CHECK("undetected change at byte " << pos << " with xor mask " << mask);
      } catch (const spar::Error& e) {
        if (e.kind() == ErrorKind::kCorruptCheckpoint) ++detected;
      }
    }
  }
  CHECK(detected == tried);
}

TEST_CASE("huge claimed lengths in a tiny file are refused before allocating", "[archive]") {
  const spar::PoolStats before = spar::pool_stats();
  const auto refused = [](const std::string& bytes, const char* needle) {
    std::string message;
    CHECK(error_kind_of([&] { Archive::from_bytes(bytes, "tiny.spar"); }, &message) ==
          ErrorKind::kCorruptCheckpoint);
    INFO(message);
    CHECK(message.find(needle) != std::string::npos);
  };

  // A float64 tensor claiming 2^40 elements, 2^43 bytes of payload (8 TiB), in ~60 bytes.
  std::string covered;
  le(covered, 2, 1);
  le(covered, 1, 2);
  covered += "w";
  le(covered, 1, 1);
  le(covered, uint64_t{1} << 40, 8);
  le(covered, uint64_t{1} << 43, 8);
  refused(header(1) + record(covered), "truncated");

  // Extents whose product overflows 64 bits to a small number that matches the payload.
  covered.clear();
  le(covered, 1, 1);
  le(covered, 1, 2);
  covered += "w";
  le(covered, 2, 1);
  le(covered, uint64_t{1} << 62, 8);
  le(covered, 4, 8);  // 2^64 elements, i.e. 0 after wrapping; 0 bytes of payload
  le(covered, 0, 8);
  refused(header(1) + record(covered), "shape");

  // A record count of 2^62 after a header with nothing behind it.
  refused(header(uint64_t{1} << 62), "truncated");

  // A text record claiming 2^63 bytes, and a name claiming 65535 bytes.
  covered.clear();
  le(covered, 4, 1);
  le(covered, 1, 2);
  covered += "t";
  le(covered, uint64_t{1} << 63, 8);
  refused(header(1) + record(covered), "truncated");
  covered.clear();
  le(covered, 4, 1);
  le(covered, 0xFFFF, 2);
  covered += "tt";
  refused(header(1) + record(covered), "truncated");

  // A rank above the maximum.
  covered.clear();
  le(covered, 1, 1);
  le(covered, 1, 2);
  covered += "r";
  le(covered, 200, 1);
  refused(header(1) + record(covered) + std::string(64, '\0'), "rank");

  // Nothing above was allocated from the pool.
  CHECK(spar::pool_stats().fresh_allocations == before.fresh_allocations);
  CHECK(spar::pool_stats().bytes_in_use == before.bytes_in_use);
}

TEST_CASE("the reader refuses other malformed archives", "[archive]") {
  const std::string good = small_archive().to_bytes();
  const auto corrupt = [](const std::string& bytes) {
    return error_kind_of([&] { Archive::from_bytes(bytes, "bad.spar"); }) ==
           ErrorKind::kCorruptCheckpoint;
  };
  CHECK(corrupt(good + "x"));                                // trailing data
  CHECK(corrupt(good + std::string(4, '\0')));               // trailing zeros
  CHECK(corrupt(std::string("SPARARCX") + good.substr(8)));  // magic

  // A record name that appears twice.
  std::string covered;
  le(covered, 3, 1);
  le(covered, 1, 2);
  covered += "n";
  le(covered, 8, 8);
  le(covered, 5, 8);
  std::string message;
  CHECK(error_kind_of(
            [&] { Archive::from_bytes(header(2) + record(covered) + record(covered), "dup.spar"); },
            &message) == ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("'n' appears twice") != std::string::npos);
  // An int64 with a payload of the wrong size, and text that is not UTF-8 (valid CRCs).
  covered.clear();
  le(covered, 3, 1);
  le(covered, 1, 2);
  covered += "n";
  le(covered, 4, 8);
  le(covered, 5, 4);
  CHECK(corrupt(header(1) + record(covered)));
  covered.clear();
  le(covered, 4, 1);
  le(covered, 1, 2);
  covered += "t";
  le(covered, 2, 8);
  covered += "\xC0\xAF";  // an overlong encoding of '/'
  CHECK(corrupt(header(1) + record(covered)));
  // Kind 0 and kind 5 are not defined.
  for (int kind : {0, 5}) {
    covered.clear();
    le(covered, static_cast<uint64_t>(kind), 1);
    le(covered, 1, 2);
    covered += "n";
    le(covered, 8, 8);
    le(covered, 5, 8);
    CHECK(corrupt(header(1) + record(covered)));
  }
}

TEST_CASE("write_file writes to_bytes through the atomic writer, read_file reads it back",
          "[archive]") {
  // What happens when a write fails is engine/atomic_file.h's (tests/test_atomic_file.cpp).
  const std::string folder = new_temp_folder("spar-archive-test");
  const std::string path = folder + "/state.spar";
  const Archive first = small_archive();
  first.write_file(path);
  CHECK(folder_entries(folder) == std::vector<std::string>{"state.spar"});
  const std::string first_bytes = read_bytes(path);
  CHECK(first_bytes == first.to_bytes());
  Archive second = small_archive();
  second.put_text("note", "second");
  std::string message;

  SECTION("an overwrite replaces the file and leaves no temporary file") {
    second.write_file(path);
    CHECK(folder_entries(folder) == std::vector<std::string>{"state.spar"});
    CHECK(read_bytes(path) == second.to_bytes());
    CHECK(Archive::read_file(path).text("note") == "second");
  }
  SECTION("a failed write raises kIo naming the path and leaves the old file") {
    const std::string blocker = path + ".tmp-" + std::to_string(static_cast<long>(getpid()));
    REQUIRE(mkdir(blocker.c_str(), 0700) == 0);
    CHECK(error_kind_of([&] { second.write_file(path); }, &message) == ErrorKind::kIo);
    CHECK(message.rfind(path + ": ", 0) == 0);
    CHECK(read_bytes(path) == first_bytes);
    rmdir(blocker.c_str());
  }
  SECTION("reading a missing or damaged file") {
    CHECK(error_kind_of([&] { Archive::read_file(folder + "/absent.spar"); }, &message) ==
          ErrorKind::kIo);
    CHECK(message.find("absent.spar") != std::string::npos);
    const std::string cut = folder + "/cut.spar";
    std::ofstream(cut, std::ios::binary) << first_bytes.substr(0, first_bytes.size() - 1);
    CHECK(error_kind_of([&] { Archive::read_file(cut); }, &message) ==
          ErrorKind::kCorruptCheckpoint);
    CHECK(message.rfind(cut + ": truncated at byte " + std::to_string(first_bytes.size() - 1), 0) ==
          0);
    std::remove(cut.c_str());
  }
  std::remove(path.c_str());
  CHECK(rmdir(folder.c_str()) == 0);
}
