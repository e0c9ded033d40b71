// The loaders declared in datasets.h: image folders (decoded and resampled by stb), IDX files
// (through idx.h) and numeric CSV tables (plain or gzipped, through zlib).
#include <stb/stb_image_resize.h>
#include <zlib.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <memory>
#include <new>
#include <string_view>
#include <system_error>

#include "engine/error.h"
#include "recipes/datasets.h"
#include "recipes/idx.h"
#include "recipes/image_files.h"

namespace spar {
namespace {

namespace fs = std::filesystem;

[[noreturn]] void fail(const std::string& where, const std::string& why) {
  raise(ErrorKind::kBadInputFile, where + ": " + why);
}

std::vector<std::string> numbered_class_names(int64_t count) {
  std::vector<std::string> names;
  for (int64_t k = 0; k < count; ++k) names.push_back(std::to_string(k));
  return names;
}

// ---- image folders -------------------------------------------------------------------------

constexpr int64_t kMaxImageSide = 16384;

bool is_hidden(const fs::path& p) {
  const std::string name = p.filename().string();
  return !name.empty() && name[0] == '.';
}

bool has_image_extension(const fs::path& p) {
  std::string ext = p.extension().string();
  for (char& c : ext) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return ext == ".png" || ext == ".jpg" || ext == ".jpeg" || ext == ".bmp";
}

bool by_bytes(const fs::path& a, const fs::path& b) {
  return a.string() < b.string();
}

// The entries directly in `folder` (hidden ones left out): image files and sub-folders, each
// sorted. Entries that are neither (other files, sockets, broken links) are ignored.
void list_folder(const fs::path& folder, std::vector<fs::path>& images,
                 std::vector<fs::path>& folders) {
  std::error_code ec;
  fs::directory_iterator it(folder, ec), end;
  for (; !ec && it != end; it.increment(ec)) {
    const fs::path& p = it->path();
    if (is_hidden(p)) continue;
    std::error_code status_ec;
    if (it->is_directory(status_ec))
      folders.push_back(p);
    else if (it->is_regular_file(status_ec) && has_image_extension(p))
      images.push_back(p);
  }
  if (ec) fail(folder.string(), "cannot list the folder: " + ec.message());
  std::sort(images.begin(), images.end(), by_bytes);
  std::sort(folders.begin(), folders.end(), by_bytes);
}

// Every image file anywhere beneath `folder` (hidden entries and what is beneath them left
// out), sorted by path.
std::vector<fs::path> images_beneath(const fs::path& folder) {
  std::vector<fs::path> images;
  std::error_code ec;
  fs::recursive_directory_iterator it(folder, ec), end;
  for (; !ec && it != end; it.increment(ec)) {
    const fs::path& p = it->path();
    std::error_code status_ec;
    if (is_hidden(p)) {
      if (it->is_directory(status_ec)) it.disable_recursion_pending();
      continue;
    }
    if (it->is_regular_file(status_ec) && has_image_extension(p)) images.push_back(p);
  }
  if (ec) fail(folder.string(), "cannot list the folder: " + ec.message());
  std::sort(images.begin(), images.end(), by_bytes);
  return images;
}

// Decodes `path` and writes its [channels, size, size] sample, values in [−1, 1], to `out`
// (see ImageLoadOptions for the geometry and the conversions).
void load_image(const std::string& path, int channels, int size, int64_t pixel_limit, float* out) {
  const DecodedImage image = decode_image_file(path, pixel_limit, "data.pixel_limit");
  const int w = image.width, h = image.height, n = image.channels;
  const unsigned char* pixels = image.pixels.get();

  // The centre square, converted to `channels` interleaved float values in 0..255.
  const int side = std::min(w, h);
  const int x0 = (w - side) / 2, y0 = (h - side) / 2;
  std::vector<float> square(static_cast<size_t>(side) * side * channels);
  for (int y = 0; y < side; ++y) {
    for (int x = 0; x < side; ++x) {
      const unsigned char* p =
          pixels + (static_cast<size_t>(y0 + y) * w + static_cast<size_t>(x0 + x)) * n;
      float* q = &square[(static_cast<size_t>(y) * side + x) * channels];
      if (n <= 2) {  // gray, gray + alpha
        for (int c = 0; c < channels; ++c) q[c] = p[0];
      } else if (channels == 3) {  // RGB, RGBA
        q[0] = p[0];
        q[1] = p[1];
        q[2] = p[2];
      } else {  // ITU-R BT.601 luma
        q[0] = 0.299f * p[0] + 0.587f * p[1] + 0.114f * p[2];
      }
    }
  }

  std::vector<float> resized;
  const std::vector<float>* result = &square;
  if (side != size) {
    resized.resize(static_cast<size_t>(size) * size * channels);
    const stbir_filter filter = side > size ? STBIR_FILTER_BOX : STBIR_FILTER_TRIANGLE;
    if (!stbir_resize_float_generic(square.data(), side, side, 0, resized.data(), size, size, 0,
                                    channels, STBIR_ALPHA_CHANNEL_NONE, 0, STBIR_EDGE_CLAMP, filter,
                                    STBIR_COLORSPACE_LINEAR, nullptr))
      throw std::bad_alloc();  // stbir fails only when its work buffer cannot be allocated
    result = &resized;
  }
  // Interleaved [size, size, channels] to channel-major [channels, size, size].
  const size_t plane = static_cast<size_t>(size) * size;
  for (size_t i = 0; i < plane; ++i)
    for (int c = 0; c < channels; ++c) {
      const float v = std::min(255.0f, std::max(0.0f, (*result)[i * channels + c]));
      out[static_cast<size_t>(c) * plane + i] = v / 127.5f - 1.0f;
    }
}

// ---- tables --------------------------------------------------------------------------------

// The whole file as text, decompressed when it is gzipped (zlib reads other files as they
// are).
std::string read_text(const std::string& path) {
  std::error_code ec;
  const fs::file_status status = fs::status(path, ec);
  if (status.type() == fs::file_type::not_found) fail(path, "no such file");
  if (ec) fail(path, "cannot inspect: " + ec.message());
  if (!fs::is_regular_file(status)) fail(path, "not a regular file");
  std::unique_ptr<gzFile_s, int (*)(gzFile)> file(gzopen(path.c_str(), "rb"), gzclose);
  if (!file) fail(path, std::string("cannot open: ") + std::strerror(errno));
  std::string text;
  std::vector<char> chunk(size_t{1} << 16);
  for (;;) {
    const int got = gzread(file.get(), chunk.data(), static_cast<unsigned>(chunk.size()));
    if (got < 0) {
      int code = Z_OK;
      const char* message = gzerror(file.get(), &code);
      if (code == Z_ERRNO) fail(path, std::string("cannot read: ") + std::strerror(errno));
      fail(path, std::string("damaged gzip data: ") + (message ? message : "unknown zlib error"));
    }
    if (got == 0) break;
    text.append(chunk.data(), static_cast<size_t>(got));
  }
  int code = Z_OK;
  gzerror(file.get(), &code);
  if (code == Z_BUF_ERROR)
    fail(path, "truncated: the gzip stream stops before its end marker and checksum");
  return text;
}

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return s;
}

// The cell as a finite number, or false.
bool parse_number(std::string_view cell, double& value) {
  if (cell.size() > 1 && cell[0] == '+' && cell[1] != '-' && cell[1] != '+') cell.remove_prefix(1);
  const char* end = cell.data() + cell.size();
  const std::from_chars_result r = std::from_chars(cell.data(), end, value);
  return r.ec == std::errc() && r.ptr == end && std::isfinite(value);
}

std::string number_text(double v) {
  char text[32];
  std::snprintf(text, sizeof text, "%.17g", v);
  return text;
}

}  // namespace

Dataset load_images(const std::string& folder, const ImageLoadOptions& options) {
  if (options.size < 1 || options.size > kMaxImageSide)
    raise(ErrorKind::kBadArgument, "load_images: size " + std::to_string(options.size) +
                                       " is outside 1.." + std::to_string(kMaxImageSide));
  if (options.channels != 1 && options.channels != 3)
    raise(ErrorKind::kBadArgument,
          "load_images: channels must be 1 or 3, got " + std::to_string(options.channels));
  std::error_code ec;
  const fs::file_status status = fs::status(folder, ec);
  if (status.type() == fs::file_type::not_found) fail(folder, "no such folder");
  if (ec) fail(folder, "cannot inspect: " + ec.message());
  if (!fs::is_directory(status)) fail(folder, "not a folder");

  std::vector<fs::path> images, class_folders;
  list_folder(folder, images, class_folders);
  Dataset data;
  if (!images.empty() && !class_folders.empty())
    fail(folder, "holds both loose images (" + images.front().filename().string() +
                     ") and class folders (" + class_folders.front().filename().string() +
                     "); put every image in a class folder, or none");
  if (!class_folders.empty()) {
    if (static_cast<int64_t>(class_folders.size()) > kMaxClasses)
      fail(folder, std::to_string(class_folders.size()) + " class folders; at most " +
                       std::to_string(kMaxClasses));
    for (size_t k = 0; k < class_folders.size(); ++k) {
      const std::vector<fs::path> found = images_beneath(class_folders[k]);
      if (found.empty())
        fail(class_folders[k].string(), "class folder without PNG, JPEG or BMP images");
      images.insert(images.end(), found.begin(), found.end());
      data.labels.insert(data.labels.end(), found.size(), static_cast<int64_t>(k));
      data.class_names.push_back(class_folders[k].filename().string());
    }
  }
  if (images.empty()) fail(folder, "holds no PNG, JPEG or BMP images");

  const int64_t n = static_cast<int64_t>(images.size());
  const int64_t c = options.channels, s = options.size;
  data.samples = Tensor<float>::uninitialised(Shape{n, c, s, s});
  float* out = data.samples.mutable_data();
  for (int64_t i = 0; i < n; ++i)
    load_image(images[static_cast<size_t>(i)].string(), static_cast<int>(c), static_cast<int>(s),
               options.pixel_limit, out + i * c * s * s);
  data.origin = "folder " + folder;
  return data;
}

Dataset load_idx_dataset(const std::string& images, const std::string& labels,
                         std::vector<std::string> class_names) {
  if (labels.empty() && !class_names.empty())
    raise(ErrorKind::kBadArgument,
          "load_idx_dataset: " + images + ": class names given without a label file");
  IdxTensor x = read_idx(images);
  if (x.type != IdxType::kUnsigned8)
    fail(images, std::string("holds ") + to_string(x.type) + " values; images are unsigned bytes");
  if (x.extents.size() != 3)
    fail(images, "has " + std::to_string(x.extents.size()) +
                     " dimensions; images are [count, height, width]");
  const int64_t n = x.extents[0], h = x.extents[1], w = x.extents[2];
  if (n == 0 || h == 0 || w == 0)
    fail(images, "holds no pixels: [" + std::to_string(n) + ", " + std::to_string(h) + ", " +
                     std::to_string(w) + "]");

  // The values were read for this call alone: scaled in place, to keep one copy in memory.
  Dataset data;
  data.samples = x.values.reshape(Shape{n, 1, h, w});
  x.values = Tensor<float>();
  float* v = data.samples.mutable_data();
  for (int64_t i = 0; i < n * h * w; ++i) v[i] = v[i] / 127.5f - 1.0f;
  data.origin = "IDX " + images;

  if (!labels.empty()) {
    IdxIntegers y = read_idx_integers(labels);
    if (y.extents.size() != 1)
      fail(labels,
           "has " + std::to_string(y.extents.size()) + " dimensions; labels are one list [count]");
    if (y.extents[0] != n)
      fail(labels, "holds " + std::to_string(y.extents[0]) + " labels for the " +
                       std::to_string(n) + " images of " + images);
    const int64_t limit =
        class_names.empty() ? kMaxClasses : static_cast<int64_t>(class_names.size());
    int64_t top = -1;
    for (int64_t i = 0; i < n; ++i) {
      const int64_t label = y.values[static_cast<size_t>(i)];
      if (label < 0 || label >= limit)
        fail(labels,
             "label " + std::to_string(label) + " of image " + std::to_string(i) +
                 (class_names.empty()
                      ? " is outside 0.." + std::to_string(kMaxClasses - 1)
                      : " has no class name (" + std::to_string(class_names.size()) + " given)"));
      top = std::max(top, label);
    }
    data.labels = std::move(y.values);
    data.class_names = class_names.empty() ? numbered_class_names(top + 1) : std::move(class_names);
  }
  return data;
}

Dataset load_table(const std::string& path, const TableOptions& options) {
  const double low = options.low, high = options.high;
  if (!std::isfinite(low) || !std::isfinite(high) || low > high)
    raise(ErrorKind::kBadArgument, "load_table: " + path + ": the range [" + number_text(low) +
                                       ", " + number_text(high) +
                                       "] is not a finite interval with low <= high");
  const std::string text = read_text(path);

  int64_t columns = -1, label_at = -1;  // set by the first data row
  std::vector<double> cells;            // all rows, row-major, as read
  std::vector<int64_t> line_of_row;
  std::vector<std::string_view> row;
  int64_t line_number = 0;
  for (size_t pos = 0; pos < text.size();) {
    size_t stop = text.find('\n', pos);
    if (stop == std::string::npos) stop = text.size();
    std::string_view line(text.data() + pos, stop - pos);
    pos = stop + 1;
    ++line_number;
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if ((line_number == 1 && options.header) || trim(line).empty()) continue;

    const std::string where = path + ":" + std::to_string(line_number);
    row.clear();
    for (size_t a = 0;;) {
      const size_t comma = line.find(',', a);
      row.push_back(trim(line.substr(a, comma == std::string_view::npos ? line.npos : comma - a)));
      if (comma == std::string_view::npos) break;
      a = comma + 1;
    }
    if (columns < 0) {
      columns = static_cast<int64_t>(row.size());
      if (options.label_column != TableOptions::kNoLabel) {
        label_at = options.label_column < 0 ? columns + options.label_column : options.label_column;
        if (label_at < 0 || label_at >= columns)
          fail(path, "label column " + std::to_string(options.label_column) +
                         " is outside the table's " + std::to_string(columns) + " columns");
        if (columns == 1) fail(path, "the label is the only column; there are no features");
      }
    } else if (static_cast<int64_t>(row.size()) != columns) {
      fail(where,
           std::to_string(row.size()) + " cells, but the first row has " + std::to_string(columns));
    }
    for (size_t k = 0; k < row.size(); ++k) {
      double v = 0;
      if (row[k].empty()) fail(where, "cell " + std::to_string(k + 1) + " is empty");
      if (!parse_number(row[k], v))
        fail(where,
             "cell " + std::to_string(k + 1) + " '" + std::string(row[k]) +
                 "' is not a finite number" +
                 (line_number == 1 && !options.header ? " (is the first line a header?)" : ""));
      cells.push_back(v);
    }
    line_of_row.push_back(line_number);
  }
  const int64_t n = static_cast<int64_t>(line_of_row.size());
  if (n == 0) fail(path, "holds no data rows");

  const int64_t features = label_at < 0 ? columns : columns - 1;
  Dataset data;
  data.origin = "table " + path;
  int64_t top = -1;
  if (label_at >= 0) {
    data.labels.resize(static_cast<size_t>(n));
    for (int64_t i = 0; i < n; ++i) {
      const double v = cells[static_cast<size_t>(i * columns + label_at)];
      if (!(v >= 0 && v < kMaxClasses && v == std::floor(v)))
        fail(path + ":" + std::to_string(line_of_row[static_cast<size_t>(i)]),
             "label " + number_text(v) + " (cell " + std::to_string(label_at + 1) +
                 ") is not an integer in 0.." + std::to_string(kMaxClasses - 1));
      data.labels[static_cast<size_t>(i)] = static_cast<int64_t>(v);
      top = std::max(top, data.labels[static_cast<size_t>(i)]);
    }
    data.class_names = numbered_class_names(top + 1);
  }

  // The range that maps to [−1, 1]: given, or the table's own.
  double from = low, to = high;
  if (low == high) {
    from = INFINITY;
    to = -INFINITY;
    for (int64_t i = 0; i < n; ++i)
      for (int64_t k = 0; k < columns; ++k) {
        if (k == label_at) continue;
        const double v = cells[static_cast<size_t>(i * columns + k)];
        from = std::min(from, v);
        to = std::max(to, v);
      }
    if (from == to)
      fail(path, "every feature cell holds " + number_text(from) +
                     ", so the table has no range to scale; give low and high");
  }
  // to − from can overflow to infinity for finite ends (−1e308 and 1e308); halving both ends
  // first keeps every intermediate finite and changes the result only for subnormal values.
  const double half = std::isfinite(to - from) ? 1.0 : 0.5;
  const double base = from * half, span = to * half - from * half;
  data.samples = Tensor<float>::uninitialised(Shape{n, features});
  float* out = data.samples.mutable_data();
  for (int64_t i = 0; i < n; ++i)
    for (int64_t k = 0; k < columns; ++k) {
      if (k == label_at) continue;
      const double v = cells[static_cast<size_t>(i * columns + k)];
      if (v < from || v > to)
        fail(path + ":" + std::to_string(line_of_row[static_cast<size_t>(i)]),
             "cell " + std::to_string(k + 1) + " holds " + number_text(v) + ", outside [" +
                 number_text(from) + ", " + number_text(to) + "]");
      *out++ = static_cast<float>(2.0 * ((v * half - base) / span) - 1.0);
    }
  return data;
}

}  // namespace spar
