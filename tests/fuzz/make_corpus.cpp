// Writes the fuzz targets' seed corpora (tests/fuzz/corpus/<target>/: small valid inputs) and
// the inputs that reproduce the faults found by hand or by earlier campaigns, made from
// their description (tests/fuzz/regressions/<target>/<what broke>).
// Usage: spar_fuzz_make_corpus SOURCE_ROOT   (rewrites the files under SOURCE_ROOT/tests/fuzz)
// The files are committed; run this only to change them. Training is deterministic and the
// runs go to one fixed folder (<temporary folder>/spar-fuzz-make-corpus, whose path the table
// generator's recipe holds), so the output is the same on every machine apart from each run's
// own identity (run.id in the saved generators and states), which differs from run to run.
// The corpora's *-format-1.spar files are not written here: they are this program's output
// from before run format 2 (docs/file-formats.md, "Run formats"), kept as seeds of the path
// that reads older files.
#include <stb/stb_image_write.h>

#include <cstdint>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "fuzz_support.h"
#include "recipes/recipe.h"
#include "recipes/run_folder.h"

namespace fs = std::filesystem;
using namespace spar;

// The replay programs' entry is not used here, but fuzz_support.h declares it.
extern "C" int LLVMFuzzerTestOneInput(const uint8_t*, size_t) {
  return 0;
}

namespace {

fs::path root;

void write(const std::string& relative, const std::string& bytes) {
  const fs::path p = root / relative;
  fs::create_directories(p.parent_path());
  std::ofstream out(p, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  if (!out) fuzz::finding("cannot write " + p.string());
  std::cout << p.string() << " (" << bytes.size() << " bytes)\n";
}

std::string read(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  if (!in) fuzz::finding("cannot read " + p.string());
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

std::string big_endian(uint64_t v, int bytes) {
  std::string s;
  for (int i = bytes - 1; i >= 0; --i) s.push_back(static_cast<char>(v >> (8 * i)));
  return s;
}
std::string little_endian(uint64_t v, int bytes) {
  std::string s;
  for (int i = 0; i < bytes; ++i) s.push_back(static_cast<char>(v >> (8 * i)));
  return s;
}

// ---- archives and saved generators ----

// Trains a run of `recipe` for one step in a scratch folder; returns its folder.
fs::path work;  // where the runs go

fs::path tiny_run(const std::string& name, Recipe recipe) {
  const fs::path folder = work / name;
  recipe.training.steps = 1;
  recipe.output.checkpoint_every = 1;
  recipe.output.sample_every = 1;
  recipe.output.log_every = 1;
  Run run = Run::start(folder.string(), recipe, /*force=*/true);
  run.train_until(1, nullptr, [](const RunProgress&) {});
  return folder;
}

Recipe with(const std::string& preset, const std::vector<std::string>& settings) {
  Recipe r = load_recipe(preset);
  for (const std::string& s : settings) apply_setting(r, s, "make_corpus");
  return r;
}

void archives_and_generators() {
  Archive a;
  a.put("weights", Tensor<float>::from_values({2, 3}, {1.5f, -0.0f, 3.25f, -4.0f, 1e-3f, 6.0f}));
  a.put("scale", Tensor<double>::scalar(0.125));
  a.put("empty", Tensor<float>::zeros({0, 4}));
  a.put_int("step", 42);
  a.put_text("note", "café");
  write("corpus/archive/records", a.to_bytes());
  write("corpus/archive/empty", Archive().to_bytes());

  // Unconditional points (dense networks), class-conditional images (convolutions) and a
  // conditional table, each trained for one step.
  const fs::path points =
      tiny_run("points", with("ring8", {"model.latent=2", "model.width=4", "model.depth=1",
                                        "training.batch=4", "output.sample_count=4"}));
  const fs::path images = tiny_run(
      "images", with("swatches-conditional",
                     {"model.latent=2", "model.width=2", "data.image_size=28",
                      "data.swatch_count=8", "training.batch=2", "output.sample_count=2"}));
  const std::string table = (work / "table.csv").string();
  std::ofstream(table) << "0,1,2,0\n3,4,5,1\n6,7,8,0\n9,10,11,1\n";
  const fs::path rows = tiny_run(
      "rows",
      with("digits", {"data.path=\"" + table + "\"", "data.picture_width=0", "data.low=0.0",
                      "data.high=0.0", "model.conditional=true", "model.latent=2", "model.width=4",
                      "model.depth=1", "training.batch=2", "output.sample_count=2"}));
  const std::string points_generator = read(points / "generator.spar");
  write("corpus/generator/points.spar", points_generator);
  write("corpus/generator/images_conditional.spar", read(images / "generator.spar"));
  write("corpus/generator/table_conditional.spar", read(rows / "generator.spar"));
  write("corpus/archive/generator.spar", points_generator);
  write("corpus/archive/state.spar", read(points / "state.spar"));

  // Regressions. A tensor [2^62, 2, 0] with an empty payload: the element count overflowed
  // on the way to 0 (65 bytes, as described in issue 10).
  std::string shape = "SPARARCH" + little_endian(1, 4) + little_endian(0, 4) + little_endian(1, 8);
  std::string record = std::string(1, '\x01') + little_endian(1, 2) + "t" + std::string(1, '\x03') +
                       little_endian(uint64_t{1} << 62, 8) + little_endian(2, 8) +
                       little_endian(0, 8) + little_endian(0, 8);
  record += little_endian(crc32(record.data(), record.size()), 4);
  write("regressions/archive/shape_2p62x2x0_element_count_overflow", shape + record);

  // A saved generator whose recorded sample shape is [2^45]: load_generator built networks
  // from it and the buffer pool's size-class index ran past its table.
  Archive g = Archive::from_bytes(points_generator, "points generator");
  g.put_int("sample.dim0", int64_t{1} << 45);
  write("regressions/generator/sample_dim0_2p45_buffer_pool_index", g.to_bytes());
  // A saved generator whose embedded recipe asks for width 4096 and depth 32: gigabytes of
  // network were built before the first tensor was found not to fit.
  Archive huge = Archive::from_bytes(points_generator, "points generator");
  Recipe r = parse_recipe(huge.text("recipe"), "points generator");
  r.model.width = 4096;
  r.model.depth = 32;
  huge.put_text("recipe", to_toml(r));
  write("regressions/generator/recipe_width4096_depth32_networks_built_first", huge.to_bytes());
}

// ---- recipes ----

void recipes(const fs::path& source_root) {
  for (const auto& entry : fs::directory_iterator(source_root / "recipes" / "presets")) {
    if (entry.path().extension() == ".toml") {
      write("corpus/recipe/" + entry.path().filename().string(), read(entry.path()));
    }
  }
  write("corpus/recipe/resolved_default.toml", to_toml(Recipe{}));
  // A path holding a control character: the resolved recipe wrote it unescaped, which is not
  // TOML, so resume and sample failed on the run's own recipe.toml.
  write("regressions/recipe/path_control_character_resolved_not_toml",
        "[data]\nsource = \"images\"\npath = \"a\\u0001b\"\n");
}

// ---- IDX files ----

std::string idx(uint8_t type, const std::vector<uint32_t>& extents, const std::string& data) {
  std::string s{'\0', '\0', static_cast<char>(type), static_cast<char>(extents.size())};
  for (uint32_t e : extents) s += big_endian(e, 4);
  return s + data;
}

void idx_files() {
  std::string pixels;
  for (int i = 0; i < 3 * 4 * 5; ++i) pixels.push_back(static_cast<char>((i * 37) % 256));
  const std::string images = idx(0x08, {3, 4, 5}, pixels);
  const std::string labels = idx(0x08, {3}, std::string{'\x00', '\x07', '\x02'});
  write("corpus/idx/images_u8", images);
  write("corpus/idx/images_u8.gz", fuzz::gzip(images));
  write("corpus/idx/labels_u8", labels);
  write("corpus/idx/labels_u8.gz", fuzz::gzip(labels));
  write("corpus/idx/signed_bytes", idx(0x09, {4}, std::string{'\x80', '\xff', '\x00', '\x7f'}));
  write("corpus/idx/int16", idx(0x0B, {2, 2},
                                big_endian(0x8000, 2) + big_endian(1, 2) + big_endian(0x7fff, 2) +
                                    big_endian(0xfffe, 2)));
  write("corpus/idx/int32",
        idx(0x0C, {3}, big_endian(0x80000000u, 4) + big_endian(16777217, 4) + big_endian(5, 4)));
  write("corpus/idx/float32",
        idx(0x0D, {2, 1}, big_endian(0x3fc00000u, 4) + big_endian(0xff800000u, 4)));  // 1.5, -inf
  write(
      "corpus/idx/float64",
      idx(0x0E, {2}, big_endian(0x3ff0000000000000ull, 8) + big_endian(0x7fefffffffffffffull, 8)));
  write("corpus/idx/scalar", idx(0x08, {}, std::string(1, '\x09')));
  // Extents ffffffff × ffffffff × 0 (16 bytes): the element count overflowed before the zero.
  write("regressions/idx/extents_ffffffff_ffffffff_0_count_overflow",
        idx(0x08, {0xffffffffu, 0xffffffffu, 0}, ""));
}

// ---- tables ----

void tables() {
  const std::string rows = "0,1,2,0\n3,4.5,5,1\n6,7,-8e-1,0\n9,10,11,2\n";
  write("corpus/table/labelled.csv", rows);
  write("corpus/table/labelled.csv.gz", fuzz::gzip(rows));
  write("corpus/table/header_crlf.csv", "a, b ,label\r\n 1.5 , +2 ,1\r\n\r\n-3,4e2,0\r\n");
  write("corpus/table/one_column.csv", "0.25\n-1\n7\n");
  // Values of ±1e308: the range scaling overflowed to infinity and put NaN into the data.
  write("regressions/table/values_pm1e308_range_scaling_overflow", "1e308,0\n-1e308,1\n");
}

// ---- images ----

void append_to(void* context, void* data, int size) {
  static_cast<std::string*>(context)->append(static_cast<const char*>(data),
                                             static_cast<size_t>(size));
}

// The images target's input: the byte choosing name and options, then the file.
std::string image_input(uint8_t choice, const std::string& file) {
  return std::string(1, static_cast<char>(choice)) + file;
}

std::string png_chunk(const std::string& type, const std::string& data) {
  const std::string body = type + data;
  return big_endian(data.size(), 4) + body + big_endian(crc32(body.data(), body.size()), 4);
}

void images() {
  std::vector<unsigned char> rgb(5 * 3 * 3), gray(4 * 4), rgba(3 * 2 * 4);
  for (size_t i = 0; i < rgb.size(); ++i) rgb[i] = static_cast<unsigned char>(i * 29);
  for (size_t i = 0; i < gray.size(); ++i) gray[i] = static_cast<unsigned char>(i * 17);
  for (size_t i = 0; i < rgba.size(); ++i) rgba[i] = static_cast<unsigned char>(255 - i * 11);
  std::string s;
  // choice: name by b % 3 (png, jpg, bmp), channels by (b / 3) % 2 (3, 1), side by (b / 6) % 3
  // (1, 7, 32); see fuzz_images.cpp.
  stbi_write_png_to_func(append_to, &s, 5, 3, 3, rgb.data(), 0);
  write("corpus/images/rgb.png", image_input(12, s));  // png, 3 channels, side 32
  s.clear();
  stbi_write_png_to_func(append_to, &s, 4, 4, 1, gray.data(), 0);
  write("corpus/images/gray.png", image_input(9, s));  // png, 1 channel, side 7
  s.clear();
  stbi_write_png_to_func(append_to, &s, 3, 2, 4, rgba.data(), 0);
  write("corpus/images/rgba.png", image_input(0, s));  // png, 3 channels, side 1
  s.clear();
  stbi_write_jpg_to_func(append_to, &s, 5, 3, 3, rgb.data(), 90);
  write("corpus/images/rgb.jpg", image_input(1, s));  // jpg, 3 channels, side 1
  s.clear();
  stbi_write_jpg_to_func(append_to, &s, 4, 4, 1, gray.data(), 75);
  write("corpus/images/gray.jpg", image_input(10, s));  // jpg, 1 channel, side 7
  s.clear();
  stbi_write_bmp_to_func(append_to, &s, 5, 3, 3, rgb.data());
  write("corpus/images/rgb.bmp", image_input(2, s));  // bmp, 3 channels, side 1
  s.clear();
  stbi_write_bmp_to_func(append_to, &s, 3, 2, 4, rgba.data());
  write("corpus/images/rgba.bmp", image_input(17, s));  // bmp, 1 channel, side 32

  // Regressions. A Radiance HDR file named .png whose run-length scanline ends at once (a
  // count of 0 at the end of the file): stb's HDR reader looped forever.
  write("regressions/images/hdr_named_png_decoder_hang",
        image_input(0, "#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n-Y 1 +X 8\n\x02\x02" +
                           std::string(1, '\0') + "\x08"));
  // A 54-byte BMP header claiming 16384 × 16384 pixels and no pixel data: gigabytes allocated.
  const std::string bmp = "BM" + little_endian(54, 4) + little_endian(0, 4) + little_endian(54, 4) +
                          little_endian(40, 4) + little_endian(16384, 4) + little_endian(16384, 4) +
                          little_endian(1, 2) + little_endian(24, 2) + little_endian(0, 4) +
                          little_endian(0, 4) + little_endian(2835, 4) + little_endian(2835, 4) +
                          little_endian(0, 4) + little_endian(0, 4);
  write("regressions/images/bmp_header_16384x16384_allocates_gigabytes", image_input(2, bmp));
  // A PNG whose header claims 16384 × 65536 16-bit gray pixels, with one byte of data: stb
  // allocated 2 GiB (and 64 KiB) for the decompressed rows before reading any.
  std::string png = "\x89PNG\r\n\x1a\n";
  png += png_chunk("IHDR", big_endian(16384, 4) + big_endian(65536, 4) +
                               std::string{'\x10', '\x00', '\0', '\0', '\0'});
  png += png_chunk("IDAT", std::string{'\x78', '\x01', '\x01', '\x01', '\0', '\xfe', '\xff', '\0',
                                       '\0', '\x01', '\0', '\x01'});
  png += png_chunk("IEND", "");
  write("regressions/images/png_header_16384x65536_16bit_allocates_2GiB", image_input(0, png));
  // A JPEG whose Huffman table (DHT) counts add up to 16 × 32 = 512 codes, more than 256: stb's
  // table builder wrote past its arrays.
  std::string jpeg =
      "\xff\xd8\xff\xc4" + big_endian(19, 2) + std::string(1, '\0') + std::string(16, '\x20');
  write("regressions/images/jpeg_dht_counts_over_256_table_overrun", image_input(1, jpeg));
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::cerr << "usage: spar_fuzz_make_corpus SOURCE_ROOT\n";
    return 2;
  }
  const fs::path source_root = argv[1];
  root = source_root / "tests" / "fuzz";
  work = fs::temp_directory_path() / "spar-fuzz-make-corpus";
  fs::remove_all(work);
  fs::create_directories(work);
  try {
    archives_and_generators();
    recipes(source_root);
    idx_files();
    tables();
    images();
  } catch (const std::exception& e) {
    std::cerr << "spar: make_corpus: " << e.what() << "\n";
    return 1;
  }
  fs::remove_all(work);
  return 0;
}
