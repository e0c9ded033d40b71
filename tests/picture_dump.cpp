// spar_picture_dump: writes pictures and charts with recipes/pictures.h and recipes/plots.h,
// together with what they were made from, so that python scripts in tests/reference/ can
// decode them with independent tools and compare.
//
// Usage:
//   spar_picture_dump png FOLDER   writes FOLDER/NAME.png and FOLDER/NAME.raw (the picture's
//                                  pixel bytes, row-major, channels interleaved) for each
//                                  test picture, and prints one line per picture on standard
//                                  output: "NAME WIDTH HEIGHT CHANNELS FILTER", where FILTER
//                                  is the PNG filter type (0-4) the encoder was made to use
//                                  on every row, or -1 for its own choice per row (as spar
//                                  writes them).
//   spar_picture_dump svg FILE     writes a two-panel line chart to FILE and its data to
//                                  FILE.json: {"x_label": ..., "panels": [{"title": ...,
//                                  "y_label": ..., "series": [{"name": ..., "x": [...],
//                                  "y": [...]}]}]}, numbers printed with %.17g (NaN and
//                                  Infinity as python's json module reads them).
//
// Exit status: 0 done; 1 spar raised an error; 2 bad usage. One line on stderr otherwise.
#include <stb/stb_image_write.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

#include "engine/error.h"
#include "engine/random.h"
#include "recipes/pictures.h"
#include "recipes/plots.h"

namespace {

using spar::Picture;

// Pixel bytes from the engine's Philox generator (any fixed bytes would do).
Picture noise_picture(int64_t width, int64_t height, int64_t channels, uint64_t seed) {
  Picture p;
  p.width = width;
  p.height = height;
  p.channels = channels;
  spar::Rng rng(seed, 0);
  for (int64_t i = 0; i < width * height * channels; ++i)
    p.pixels.push_back(static_cast<uint8_t>(rng.next_u32() >> 24));
  return p;
}

// A smooth picture, where the predicting filters (Sub, Up, Average, Paeth) pay off.
Picture gradient_picture(int64_t width, int64_t height, int64_t channels) {
  Picture p;
  p.width = width;
  p.height = height;
  p.channels = channels;
  for (int64_t y = 0; y < height; ++y)
    for (int64_t x = 0; x < width; ++x)
      for (int64_t c = 0; c < channels; ++c)
        p.pixels.push_back(static_cast<uint8_t>((x * 37 + y * 11 + c * 80 + x * y) % 256));
  return p;
}

void dump_png(const std::string& folder) {
  std::vector<std::pair<std::string, Picture>> pictures = {
      {"gray_1x1", noise_picture(1, 1, 1, 1)},    {"gray_7x5", noise_picture(7, 5, 1, 2)},
      {"rgb_13x9", noise_picture(13, 9, 3, 3)},   {"rgb_1x6", noise_picture(1, 6, 3, 4)},
      {"gray_31x3", gradient_picture(31, 3, 1)},  {"rgb_3x17", gradient_picture(3, 17, 3)},
      {"rgb_64x48", gradient_picture(64, 48, 3)},
  };
  // Pictures as spar draws them: a tile grid of random images and a scatter plot.
  spar::Rng rng(5, 0);
  pictures.push_back(
      {"tiles", spar::tile_pictures(rng.uniform<float>({5, 3, 6, 7}, -1.2f, 1.2f), 3, 2, 2)});
  pictures.push_back({"scatter", spar::scatter_picture(rng.normal<float>({300, 2}),
                                                       {{0.0, 0.0}, {1.0, -1.0}}, 3.0, 123)});
  const int kDefault = stbi_write_force_png_filter;  // -1: the encoder chooses per row
  for (const auto& entry : pictures) {
    for (int filter = -1; filter <= 4; ++filter) {
      const std::string name = entry.first + (filter < 0 ? "" : "_f" + std::to_string(filter));
      stbi_write_force_png_filter = filter;
      spar::write_png(folder + "/" + name + ".png", entry.second);
      stbi_write_force_png_filter = kDefault;
      spar::write_file_atomically(folder + "/" + name + ".raw", entry.second.pixels.data(),
                                  entry.second.pixels.size());
      std::printf("%s %lld %lld %lld %d\n", name.c_str(),
                  static_cast<long long>(entry.second.width),
                  static_cast<long long>(entry.second.height),
                  static_cast<long long>(entry.second.channels), filter);
    }
  }
}

std::string json_string(const std::string& s) {
  std::string out = "\"";
  for (char ch : s) {
    const unsigned char c = static_cast<unsigned char>(ch);
    if (c == '"' || c == '\\') {
      out += '\\';
      out += ch;
    } else if (c < 0x20) {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\u%04x", c);
      out += buf;
    } else {
      out += ch;
    }
  }
  return out + "\"";
}

std::string json_numbers(const std::vector<double>& v) {
  std::string out = "[";
  for (size_t i = 0; i < v.size(); ++i) {
    if (i) out += ", ";
    if (std::isnan(v[i])) {
      out += "NaN";
    } else if (std::isinf(v[i])) {
      out += v[i] > 0 ? "Infinity" : "-Infinity";
    } else {
      char buf[40];
      std::snprintf(buf, sizeof buf, "%.17g", v[i]);
      out += buf;
    }
  }
  return out + "]";
}

void dump_svg(const std::string& path) {
  const double nan = std::nan(""), inf = INFINITY;
  spar::PlotSeries critic{"critic loss <C>", {}, {}}, generator{"generator loss", {}, {}},
      generated{"generated & \"fake\"", {}, {}};
  for (int i = 0; i < 60; ++i) {
    critic.x.push_back(i * 25);
    critic.y.push_back(-1.5 + std::exp(-i / 15.0) + 0.1 * std::sin(i));
    generator.x.push_back(i * 25);
    generator.y.push_back(0.7 + 0.3 * std::cos(i / 7.0));
    generated.x.push_back(i * 25);
    generated.y.push_back(-0.03 * i);
  }
  critic.y[20] = nan;  // a gap: two lines
  critic.y[22] = inf;  // and an isolated point between two gaps: a dot
  generator.y[59] = -inf;
  generated.x[5] = nan;
  const std::vector<spar::PlotPanel> panels = {
      {"losses: critic & generator", "loss <per step>", {critic, generator, {"empty", {}, {}}}},
      {"critic outputs \xC3\xBC\xE2\x80\x94", "mean score", {{"real", {300}, {0.25}}, generated}},
  };
  const std::string x_label = "generator steps";
  spar::write_svg(path, spar::line_chart_svg(panels, x_label));

  std::string json = "{\"x_label\": " + json_string(x_label) + ", \"panels\": [";
  for (size_t p = 0; p < panels.size(); ++p) {
    json += p ? ", " : "";
    json += "{\"title\": " + json_string(panels[p].title) +
            ", \"y_label\": " + json_string(panels[p].y_label) + ", \"series\": [";
    for (size_t k = 0; k < panels[p].series.size(); ++k) {
      const spar::PlotSeries& s = panels[p].series[k];
      json += k ? ", " : "";
      json += "{\"name\": " + json_string(s.name) + ", \"x\": " + json_numbers(s.x) +
              ", \"y\": " + json_numbers(s.y) + "}";
    }
    json += "]}";
  }
  json += "]}\n";
  spar::write_file_atomically(path + ".json", json.data(), json.size());
}

}  // namespace

int main(int argc, char** argv) {
  const std::string mode = argc == 3 ? argv[1] : "";
  if (mode != "png" && mode != "svg") {
    std::fprintf(stderr, "usage: spar_picture_dump png FOLDER | svg FILE\n");
    return 2;
  }
  try {
    if (mode == "png")
      dump_png(argv[2]);
    else
      dump_svg(argv[2]);
  } catch (const spar::Error& e) {
    std::fprintf(stderr, "spar_picture_dump: %s\n", e.what());
    return 1;
  }
  return 0;
}
