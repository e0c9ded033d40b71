// CSV tables (recipes/datasets.h): the digits table, scaling, label columns, gzip, errors.
#include <zlib.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <fstream>
#include <string>
#include <vector>

#include "recipes/datasets.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::require_bad_input;
using testing::same_bits;
using testing::ScratchDir;
using testing::write_bytes;

const std::string kDigits = "/usr/lib/python3/dist-packages/sklearn/datasets/data/digits.csv.gz";

std::string write_gzip(const std::string& path, const std::string& bytes) {
  gzFile f = gzopen(path.c_str(), "wb");
  REQUIRE(f != nullptr);
  REQUIRE(gzwrite(f, bytes.data(), static_cast<unsigned>(bytes.size())) ==
          static_cast<int>(bytes.size()));
  REQUIRE(gzclose(f) == Z_OK);
  return path;
}

// The digits table (docs/references.md): 1,797 rows of 64 pixel values 0 to 16, then the label of
// 10 classes. tests/reference/check_table.py compares every value with numpy.loadtxt.
TEST_CASE("the digits table: 1,797 samples of 64 features, 10 classes", "[datasets]") {
  TableOptions options;
  options.label_column = -1;
  options.low = 0;
  options.high = 16;
  const Dataset d = load_table(kDigits, options);
  REQUIRE(d.samples.shape() == Shape({1797, 64}));
  CHECK(d.class_names ==
        std::vector<std::string>{"0", "1", "2", "3", "4", "5", "6", "7", "8", "9"});
  REQUIRE(d.labels.size() == 1797);
  std::vector<int64_t> per_class(10, 0);
  for (int64_t y : d.labels) ++per_class[static_cast<size_t>(y)];
  for (int64_t c : per_class) CHECK(c > 0);
  const auto [low, high] = std::minmax_element(d.samples.data(), d.samples.data() + 1797 * 64);
  CHECK(*low == -1.0f);  // values 0 and 16 both occur
  CHECK(*high == 1.0f);

  // The table's own range is 0..16, so the default (low == high) gives the same samples;
  // the label counted from the front gives the same labels.
  TableOptions own;
  own.label_column = 64;
  const Dataset same = load_table(kDigits, own);
  CHECK(same_bits(same.samples, d.samples));
  CHECK(same.labels == d.labels);
}

TEST_CASE("small tables: scaling, label columns, header, blanks, CRLF, gzip", "[datasets]") {
  ScratchDir dir;
  const std::string text = "1, 2,0\n3,4.5,1\r\n\n-1,+0.25 ,2\n";
  const std::string plain = write_bytes(dir.file("t.csv"), text);
  TableOptions options;
  options.label_column = -1;
  const Dataset d = load_table(plain, options);
  REQUIRE(d.samples.shape() == Shape({3, 2}));
  CHECK(d.labels == std::vector<int64_t>{0, 1, 2});
  CHECK(d.class_names == std::vector<std::string>{"0", "1", "2"});
  // Own range [−1, 4.5]: v ↦ 2 (v + 1) / 5.5 − 1.
  const std::vector<double> raw = {1, 2, 3, 4.5, -1, 0.25};
  for (size_t i = 0; i < raw.size(); ++i)
    CHECK(d.samples.data()[i] == Approx(2 * (raw[i] + 1) / 5.5 - 1).margin(1e-7));

  const std::string gz = write_gzip(dir.file("t.csv.gz"), text);
  const Dataset z = load_table(gz, options);
  CHECK(same_bits(z.samples, d.samples));
  CHECK(z.labels == d.labels);

  TableOptions first;
  first.label_column = 0;
  first.low = -2;
  first.high = 6;
  // [−2, 6] ↦ [−1, 1]: 2 ↦ 0, 6 ↦ 1, −2 ↦ −1, 4 ↦ 0.5 (all exact in binary).
  const Dataset f = load_table(write_bytes(dir.file("f.csv"), "1,2,6\n0,-2,4\n"), first);
  REQUIRE(f.samples.shape() == Shape({2, 2}));
  CHECK(f.labels == std::vector<int64_t>{1, 0});
  CHECK(f.samples.to_vector() == std::vector<float>{0.0f, 1.0f, -1.0f, 0.5f});

  TableOptions unlabelled;
  unlabelled.low = 0;
  unlabelled.high = 10;
  unlabelled.header = true;
  const Dataset u =
      load_table(write_bytes(dir.file("u.csv"), "width,height\n5,10\n0,2.5\n"), unlabelled);
  CHECK(u.samples.to_vector() == std::vector<float>{0.0f, 1.0f, -1.0f, -0.5f});
  CHECK(u.labels.empty());
  CHECK(u.classes() == 0);
}

TEST_CASE("tables at the ends of the double range scale without overflow", "[datasets]") {
  // Regression: ±1e308 made the range 2e308 = inf and put NaN into the samples. Expected
  // values from the formula 2 (v − low) / (high − low) − 1 worked out by hand.
  ScratchDir dir;
  const Dataset own = load_table(
      write_bytes(dir.file("wide.csv"), "-1e308,0\n1e308,5e307\n-1.7976931348623157e308,1\n"),
      TableOptions{});
  const std::vector<float> v = own.samples.to_vector();
  REQUIRE(v.size() == 6);
  for (float x : v) CHECK(std::isfinite(x));
  // The table's own range is [−DBL_MAX, 1e308]: −DBL_MAX ↦ −1, 1e308 ↦ 1.
  CHECK(v[4] == -1.0f);
  CHECK(v[2] == 1.0f);
  const double low = -1.7976931348623157e308, high = 1e308;
  CHECK(v[1] == Approx(2 * (0 / 2 - low / 2) / (high / 2 - low / 2) - 1).margin(1e-7));
  TableOptions given;
  given.low = -1e308;
  given.high = 1e308;
  const Dataset fixed =
      load_table(write_bytes(dir.file("given.csv"), "-1e308,0,1e308,5e307\n"), given);
  CHECK(fixed.samples.to_vector() == std::vector<float>{-1.0f, 0.0f, 1.0f, 0.5f});
}

TEST_CASE("table errors name the file and line", "[datasets]") {
  ScratchDir dir;
  TableOptions labelled;
  labelled.label_column = -1;
  auto bad = [&](const std::string& name, const std::string& text, const std::string& at,
                 const TableOptions& options) {
    const std::string path = write_bytes(dir.file(name), text);
    INFO(name);
    require_bad_input([&] { load_table(path, options); }, path + at);
  };
  bad("ragged.csv", "1,2,0\n3,4,1\n5,1\n", ":3:", labelled);
  bad("cell.csv", "1,2,0\n3,x4,1\n", ":2:", labelled);
  bad("empty_cell.csv", "1,,0\n", ":1:", labelled);
  bad("infinite.csv", "1,inf,0\n", ":1:", labelled);
  bad("negative.csv", "1,2,0\n3,4,-1\n", ":2:", labelled);
  bad("fraction.csv", "1,2,0.5\n", ":1:", labelled);
  bad("header.csv", "a,b,label\n1,2,0\n", ":1:", labelled);  // a header not declared
  bad("empty.csv", "", ": ", labelled);
  bad("only_blank.csv", "\n \n", ": ", labelled);
  bad("constant.csv", "3,3,0\n3,3,1\n", ": ", labelled);  // own range empty
  TableOptions header_only = labelled;
  header_only.header = true;
  bad("header_only.csv", "a,b,label\n", ": ", header_only);
  TableOptions ranged = labelled;
  ranged.low = 0;
  ranged.high = 16;
  bad("outside.csv", "1,2,0\n1,17,0\n", ":2:", ranged);
  TableOptions far = labelled;
  far.label_column = 3;
  bad("column.csv", "1,2,0\n", ": ", far);

  const std::string missing = dir.file("missing.csv");
  require_bad_input([&] { load_table(missing, labelled); }, missing);
  // A gzip file cut short of its end marker and checksum.
  std::string rows;
  for (int i = 0; i < 2000; ++i) rows += std::to_string(i) + "," + std::to_string(i % 7) + "\n";
  const std::string whole = write_gzip(dir.file("whole.csv.gz"), rows);
  std::ifstream in(whole, std::ios::binary);
  const std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string cut = write_bytes(dir.file("cut.csv.gz"), bytes.substr(0, bytes.size() / 2));
  require_bad_input([&] { load_table(cut, labelled); }, cut);

  TableOptions reversed;
  reversed.low = 2;
  reversed.high = 1;
  CHECK(error_kind_of([&] { load_table(missing, reversed); }) == ErrorKind::kBadArgument);
}

}  // namespace
}  // namespace spar
