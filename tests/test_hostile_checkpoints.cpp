// Checkpoints that declare enormous tensors or networks: each must be refused with
// kCorruptCheckpoint naming the record, before anything big is allocated. The files are built
// by hand from the record layout in docs/file-formats.md ("Archive (.spar files)"), or made
// from a real run's files by rewriting one record and recomputing its CRC-32.
// Memory is watched through the buffer pool, where every tensor's storage comes from: the
// bytes it holds and caches may grow by less than 64 MiB across the call (a tensor that was
// allocated and freed again stays in the pool's cache, so it still counts).
#include <catch2/catch.hpp>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <functional>
#include <sstream>
#include <string>

#include "engine/archive.h"
#include "engine/buffer_pool.h"
#include "engine/error.h"
#include "recipes/recipe.h"
#include "recipes/run_folder.h"
#include "recipes/saved_generator.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::read_bytes;
using testing::write_bytes;
using testing::ScratchDir;

constexpr int64_t kBigAllocation = int64_t{64} << 20;  // 64 MiB

// How much the buffer pool grew (held plus cached bytes) since construction.
class PoolWatch {
 public:
  PoolWatch() {
    pool_release_cached();  // so a big block cached by an earlier test cannot be reused unseen
    before_ = total();
  }
  int64_t growth() const { return total() - before_; }

 private:
  static int64_t total() {
    const PoolStats s = pool_stats();
    return s.bytes_in_use + s.bytes_cached;
  }
  int64_t before_ = 0;
};

// Little-endian fields, the header and a record with its CRC, as docs/file-formats.md lays
// them out.
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
std::string with_crc(std::string covered) {
  const uint32_t crc = crc32(covered.data(), covered.size());
  le(covered, crc, 4);
  return covered;
}
// A float32 tensor record (kind 1) of these extents whose payload-length field says
// `declared` bytes, followed by `payload`.
std::string tensor_record(const std::string& name, std::initializer_list<uint64_t> extents,
                          uint64_t declared, const std::string& payload) {
  std::string r;
  le(r, 1, 1);
  le(r, name.size(), 2);
  r += name;
  le(r, extents.size(), 1);
  for (uint64_t e : extents) le(r, e, 8);
  le(r, declared, 8);
  return with_crc(r + payload);
}

uint64_t read_le(const std::string& bytes, size_t at, int n) {
  uint64_t v = 0;
  for (int b = 0; b < n; ++b) v |= uint64_t{static_cast<unsigned char>(bytes[at + b])} << (8 * b);
  return v;
}

// The archive `bytes` with the payload of record `name` replaced by `payload` (its length
// field and CRC-32 rewritten to match). Walks the layout of docs/file-formats.md.
std::string with_payload(const std::string& bytes, const std::string& name,
                         const std::string& payload) {
  const uint64_t count = read_le(bytes, 16, 8);
  std::string out = bytes.substr(0, 24);
  size_t at = 24;
  bool found = false;
  for (uint64_t i = 0; i < count; ++i) {
    const size_t start = at;
    const auto kind = static_cast<unsigned>(read_le(bytes, at, 1));
    const size_t name_bytes = read_le(bytes, at + 1, 2);
    const std::string record_name = bytes.substr(at + 3, name_bytes);
    at += 3 + name_bytes;
    if (kind == 1 || kind == 2) at += 1 + 8 * read_le(bytes, at, 1);  // rank and extents
    const size_t payload_bytes = read_le(bytes, at, 8);
    const size_t head_end = at;  // where the payload length begins
    at += 8 + payload_bytes + 4;
    if (record_name != name) {
      out += bytes.substr(start, at - start);
      continue;
    }
    found = true;
    std::string covered = bytes.substr(start, head_end - start);
    le(covered, payload.size(), 8);
    out += with_crc(covered + payload);
  }
  REQUIRE(found);
  REQUIRE(at == bytes.size());
  return out;
}

std::string int64_payload(int64_t value) {
  std::string p;
  le(p, static_cast<uint64_t>(value), 8);
  return p;
}

// A real run folder: ring8 trained a few steps through the library.
std::string small_run(const ScratchDir& dir) {
  Recipe r = load_recipe("ring8");
  r.model.width = 16;
  r.training.batch = 16;
  r.training.steps = 4;
  r.output.checkpoint_every = 2;
  r.output.sample_every = 4;
  r.output.sample_count = 16;
  const std::string folder = dir.folder("run");
  Run run = Run::start(folder, r, false);
  REQUIRE(run.train_until(r.training.steps, nullptr, nullptr).end == RunEnd::kFinished);
  return folder;
}

// The message of the kCorruptCheckpoint error `fn` raises, checking that the pool did not grow
// by 64 MiB or more.
std::string refusal(const std::function<void()>& fn) {
  const PoolWatch watch;
  std::string message;
  CHECK(error_kind_of(fn, &message) == ErrorKind::kCorruptCheckpoint);
  CHECK(watch.growth() < kBigAllocation);
  return message;
}

TEST_CASE("a tensor of shape [2^62, 2, 0] with an empty payload is refused", "[hostile]") {
  // 2^62 · 2 · 0 = 0 elements match the empty payload, but the extents multiply past any
  // real tensor (2^63 overflows an int64).
  const std::string bytes = header(1) + tensor_record("huge", {uint64_t{1} << 62, 2, 0}, 0, "");
  CHECK_THAT(refusal([&] { Archive::from_bytes(bytes, "crafted.spar"); }),
             Catch::Contains("crafted.spar") && Catch::Contains("'huge'"));
  ScratchDir dir;
  const std::string path = dir.file("crafted.spar");
  write_bytes(path, bytes);
  CHECK_THAT(refusal([&] { Archive::read_file(path); }),
             Catch::Contains(path) && Catch::Contains("'huge'"));
}

TEST_CASE("a tensor of shape [2^40, 2^40] with a short payload is refused", "[hostile]") {
  const uint64_t big = uint64_t{1} << 40;
  const std::string payload(16, '\0');
  SECTION("the payload length says 16 bytes") {
    const std::string bytes = header(1) + tensor_record("wide", {big, big}, 16, payload);
    CHECK_THAT(refusal([&] { Archive::from_bytes(bytes, "crafted.spar"); }),
               Catch::Contains("'wide'"));
  }
  SECTION("the payload length claims more bytes than the file holds") {
    const std::string bytes =
        header(1) + tensor_record("wide", {big, big}, uint64_t{1} << 62, payload);
    CHECK_THAT(refusal([&] { Archive::from_bytes(bytes, "crafted.spar"); }),
               Catch::Contains("'wide'"));
  }
}

TEST_CASE("a saved generator whose sample shape is enormous is refused before networks are built",
          "[hostile]") {
  ScratchDir dir;
  const std::string path = small_run(dir) + "/generator.spar";
  const std::string original = read_bytes(path);
  // The rewriting itself keeps a valid file: the recorded value written back loads.
  write_bytes(path, with_payload(original, "sample.dim0", int64_payload(2)));
  CHECK(load_generator(path).sample_shape == Shape({2}));
  // 2^45 points of 2^45 coordinates each, and a negative extent.
  for (const int64_t dim0 : {int64_t{35184372088832}, int64_t{-3}}) {
    CAPTURE(dim0);
    write_bytes(path, with_payload(original, "sample.dim0", int64_payload(dim0)));
    CHECK_THAT(refusal([&] { load_generator(path); }),
               Catch::Contains(path) && Catch::Contains("sample.dim0"));
  }
}

// Whether `message` names what is at fault in the archive at `path`: one of its records,
// quoted, or the recipe key model.width.
bool names_the_culprit(const std::string& message, const std::string& path) {
  if (message.find("model.width") != std::string::npos) return true;
  for (const std::string& name : Archive::read_file(path).names())
    if (message.find("'" + name + "'") != std::string::npos) return true;
  return false;
}

// The recipe text of the archive at `path` with a huge network: 32 layers of 4096 units
// (about 2 GB of float32 weights per network).
std::string huge_network_recipe(const std::string& path) {
  Recipe r = parse_recipe(Archive::read_file(path).text("recipe"), path);
  r.model.width = 4096;
  r.model.depth = 32;
  return to_toml(r);
}

TEST_CASE("a saved generator whose recipe does not fit its tensors is refused before building",
          "[hostile]") {
  ScratchDir dir;
  const std::string path = small_run(dir) + "/generator.spar";
  const std::string original = read_bytes(path);
  const std::string recipe = Archive::read_file(path).text("recipe");
  // The rewriting itself keeps a valid file: the recipe read and written back loads.
  write_bytes(path, with_payload(original, "recipe", to_toml(parse_recipe(recipe, path))));
  CHECK(load_generator(path).recipe.model.width == 16);
  write_bytes(path, with_payload(original, "recipe", huge_network_recipe(path)));
  const std::string message = refusal([&] { load_generator(path); });
  INFO(message);
  CHECK_THAT(message, Catch::Contains(path));
  CHECK(names_the_culprit(message, path));
}

TEST_CASE("a training state whose recipe does not fit its tensors is refused before building",
          "[hostile]") {
  ScratchDir dir;
  const std::string folder = small_run(dir);
  const std::string path = folder + "/state.spar";
  const std::string original = read_bytes(path);
  const std::string recipe = Archive::read_file(path).text("recipe");
  write_bytes(path, with_payload(original, "recipe", to_toml(parse_recipe(recipe, path))));
  CHECK(Run::reopen(folder).steps_done() == 4);  // the rewriting itself keeps a valid state
  // recipe.toml says the same as the crafted state (its opening comment kept), so only the
  // state's tensors can show that the recipe does not fit.
  const std::string huge = huge_network_recipe(path);
  std::string recipe_file = read_bytes(folder + "/recipe.toml"), comment;
  for (size_t at = 0; at < recipe_file.size() && recipe_file[at] == '#';) {
    const size_t end = recipe_file.find('\n', at);
    comment += recipe_file.substr(at, end - at + 1);
    at = end + 1;
  }
  write_bytes(folder + "/recipe.toml", comment + huge);
  write_bytes(path, with_payload(original, "recipe", huge));
  const std::string message = refusal([&] { Run::reopen(folder); });
  INFO(message);
  CHECK_THAT(message, Catch::Contains(path));
  CHECK(names_the_culprit(message, path));
}

}  // namespace
}  // namespace spar
