#include "recipes/swatches.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "engine/error.h"
#include "engine/parallel.h"
#include "engine/random.h"

namespace spar {

const std::vector<std::string>& swatch_families() {
  static const std::vector<std::string> names = {"plain", "stripes",     "checks",      "plaid",
                                                 "twill", "herringbone", "houndstooth", "dots"};
  return names;
}

namespace {

enum Family { kPlain, kStripes, kChecks, kPlaid, kTwill, kHerringbone, kHoundstooth, kDots };

struct Colour {
  float r = 0, g = 0, b = 0;
};

Colour mix(Colour a, Colour b, float t) {
  return {a.r + (b.r - a.r) * t, a.g + (b.g - a.g) * t, a.b + (b.b - a.b) * t};
}

// HSL to RGB by the formula of CSS Color Module Level 4 (section "HSL colours"); hue in turns.
Colour from_hsl(double hue, double saturation, double lightness) {
  hue -= std::floor(hue);
  const double a = saturation * std::min(lightness, 1 - lightness);
  auto channel = [&](double n) {
    const double k = std::fmod(n + hue * 12, 12);
    return static_cast<float>(lightness - a * std::max(-1.0, std::min({k - 3, 9 - k, 1.0})));
  };
  return {channel(0), channel(8), channel(4)};
}

// Scalar draws for one swatch.
class Draws {
 public:
  explicit Draws(Rng& rng) : rng_(rng) {}
  double uniform(double low, double high) { return low + (high - low) * rng_.next_uniform(); }
  int64_t integer(int64_t low, int64_t high) {  // in [low, high]
    return low + static_cast<int64_t>(rng_.below(static_cast<uint64_t>(high - low + 1)));
  }
  bool chance(double p) { return rng_.next_uniform() < p; }

 private:
  Rng& rng_;
};

// A ground, an accent whose lightness contrasts with it, and a third colour of middle
// lightness at another hue: light grounds are pale tints or ecru, dark ones deep shades.
struct Palette {
  Colour ground, accent, third;
};

Palette draw_palette(Draws& d) {
  const double hue = d.uniform(0, 1);
  Palette p;
  if (d.chance(0.55)) {
    const double ground_hue = d.chance(0.4) ? d.uniform(0.08, 0.15) : hue + d.uniform(-0.1, 0.1);
    p.ground = from_hsl(ground_hue, d.uniform(0.1, 0.5), d.uniform(0.8, 0.92));
    p.accent = from_hsl(hue, d.uniform(0.45, 0.85), d.uniform(0.22, 0.42));
  } else {
    p.ground = from_hsl(hue + d.uniform(0.3, 0.7), d.uniform(0.15, 0.6), d.uniform(0.13, 0.3));
    p.accent = from_hsl(hue, d.uniform(0.45, 0.85), d.uniform(0.62, 0.8));
  }
  p.third = from_hsl(hue + d.uniform(0.25, 0.75), d.uniform(0.4, 0.8), d.uniform(0.4, 0.6));
  return p;
}

// Which thread shows at the crossing of warp thread u and weft thread v (u, v ≥ 0).
struct Weave {
  enum Kind { kPlainWeave, kTwillWeave, kSatinWeave } kind = kPlainWeave;
  int64_t up = 1, repeat = 2;  // twill: the warp passes over `up` of every `repeat` wefts
  int64_t band = 0;            // twill: its direction mirrors every `band` warp threads (0: never)

  bool warp_on_top(int64_t u, int64_t v) const {
    switch (kind) {
      case kPlainWeave:
        return ((u + v) & 1) == 0;
      case kTwillWeave:
        if (band > 0) {
          const int64_t local = u % (2 * band);
          u = local < band ? local : 2 * band - 1 - local;
        }
        return (u + v) % repeat < up;
      case kSatinWeave:  // five-end warp satin, counter 2: one weft float per five
        return (2 * u + v) % 5 != 0;
    }
    return true;
  }
};

// Colour sequences: `bands` of (colour, threads) repeated.
std::vector<Colour> sett(const std::vector<std::pair<Colour, int64_t>>& bands) {
  std::vector<Colour> threads;
  for (const auto& b : bands) threads.insert(threads.end(), static_cast<size_t>(b.second), b.first);
  return threads;
}

// How strongly each part of the texture shades a pixel (fractions of its colour).
struct Texture {
  float thread = 0.035f;  // each thread's own shade, ± this
  float yarn = 0.03f;     // per-pixel yarn noise, ± this
  float relief = 0.025f;  // warp floats lighter and weft floats darker by this
  float edge = 0.07f;     // the first pixel across a thread wider than one pixel, darker
};

// One swatch being drawn: the colour of each pixel and which thread shows there.
class Canvas {
 public:
  Canvas(int64_t size, const float* noise)
      : size_(size), noise_(noise), colour_(size * size), warp_top_(size * size, 1) {}

  int64_t size() const { return size_; }
  Colour& at(int64_t x, int64_t y) { return colour_[y * size_ + x]; }

  // Weaves warp threads of colours warp[(x / scale + shift_u) mod |warp|] with weft threads
  // weft[(y / scale + shift_v) mod |weft|]; `under` is how much of the hidden thread shows.
  void weave(const std::vector<Colour>& warp, const std::vector<Colour>& weft, const Weave& w,
             float under, int64_t scale, int64_t shift_u, int64_t shift_v) {
    scale_ = scale;
    const int64_t nu = static_cast<int64_t>(warp.size()), nv = static_cast<int64_t>(weft.size());
    for (int64_t y = 0; y < size_; ++y) {
      const int64_t v = y / scale + shift_v;
      for (int64_t x = 0; x < size_; ++x) {
        const int64_t u = x / scale + shift_u;
        const bool top = w.warp_on_top(u, v);
        const Colour a = warp[u % nu], b = weft[v % nv];
        at(x, y) = top ? mix(a, b, under) : mix(b, a, under);
        warp_top_[y * size_ + x] = top;
      }
    }
  }

  // Recolours every column x with colours[(x / scale + shift) mod |colours|], keeping the
  // weave: a warp-faced cloth, where the weft hardly shows.
  void paint_columns(const std::vector<Colour>& colours, int64_t scale, int64_t shift) {
    const int64_t n = static_cast<int64_t>(colours.size());
    for (int64_t y = 0; y < size_; ++y)
      for (int64_t x = 0; x < size_; ++x) at(x, y) = colours[(x / scale + shift) % n];
  }

  // Shades every pixel by the texture. The noise holds size² per-pixel values, then size
  // warp-thread and size weft-thread values, all uniform in [0, 1).
  void add_texture(const Texture& t) {
    const float* pixel = noise_;
    const float* warp = noise_ + size_ * size_;
    const float* weft = warp + size_;
    for (int64_t y = 0; y < size_; ++y)
      for (int64_t x = 0; x < size_; ++x) {
        const bool top = warp_top_[y * size_ + x] != 0;
        const float thread = top ? warp[x / scale_] : weft[y / scale_];
        float f = 1 + t.thread * (2 * thread - 1) + t.yarn * (2 * pixel[y * size_ + x] - 1) +
                  (top ? t.relief : -t.relief);
        if (scale_ > 1 && (top ? x : y) % scale_ == 0) f -= t.edge;
        Colour& c = at(x, y);
        c = {c.r * f, c.g * f, c.b * f};
      }
  }

  // Writes the swatch as channel-major RGB in [−1, 1], transposed and/or mirrored
  // left-to-right as asked (orientation and twill direction).
  void store(float* out, bool transpose, bool mirror) const {
    const int64_t plane = size_ * size_;
    for (int64_t y = 0; y < size_; ++y)
      for (int64_t x = 0; x < size_; ++x) {
        int64_t sx = mirror ? size_ - 1 - x : x, sy = y;
        if (transpose) std::swap(sx, sy);
        const Colour& c = colour_[sy * size_ + sx];
        const float rgb[3] = {c.r, c.g, c.b};
        for (int k = 0; k < 3; ++k)
          out[k * plane + y * size_ + x] = 2 * std::min(1.0f, std::max(0.0f, rgb[k])) - 1;
      }
  }

 private:
  int64_t size_;
  const float* noise_;
  std::vector<Colour> colour_;
  std::vector<uint8_t> warp_top_;
  int64_t scale_ = 1;
};

void draw_swatch(Family family, int64_t size, Rng& rng, float* out) {
  Draws d(rng);
  const int64_t pitch = std::max<int64_t>(1, std::lround(size / 32.0));
  const Palette pal = draw_palette(d);
  const Tensor<float> noise = rng.uniform<float>(Shape{size * size + 2 * size});
  Canvas canvas(size, noise.data());
  const int64_t shift_u = d.integer(0, 63), shift_v = d.integer(0, 63);
  Texture texture;
  bool transpose = false, mirror = d.chance(0.5);
  switch (family) {
    case kPlain: {
      const Colour c = d.chance(0.5) ? pal.ground : pal.accent;
      canvas.weave({c}, {c}, Weave{}, 0, pitch, shift_u, shift_v);
      texture.thread = 0.07f;
      // Slubs: thick places in a few weft threads, lighter (or darker) for a short run.
      for (int64_t row = 0; row < size; row += pitch) {
        if (!d.chance(0.25)) continue;
        const int64_t start = d.integer(-4, size - 1), length = d.integer(4, 11) * pitch;
        const float amount = static_cast<float>(d.uniform(0.15, 0.28));
        const Colour towards = d.chance(0.75) ? Colour{1, 1, 1} : Colour{0, 0, 0};
        for (int64_t y = row; y < std::min(size, row + pitch); ++y)
          for (int64_t x = std::max<int64_t>(0, start); x < std::min(size, start + length); ++x)
            canvas.at(x, y) = mix(canvas.at(x, y), towards, amount);
      }
      break;
    }
    case kStripes: {
      std::vector<std::pair<Colour, int64_t>> bands = {{pal.ground, d.integer(2, 6)},
                                                       {pal.accent, d.integer(1, 5)}};
      const int64_t layout = d.integer(0, 2);
      if (layout == 1) {
        bands.push_back({pal.third, d.integer(1, 4)});
      } else if (layout == 2) {
        bands.push_back({pal.ground, d.integer(1, 4)});
        bands.push_back({pal.third, d.integer(1, 3)});
      }
      canvas.weave({pal.ground}, {pal.ground}, Weave{Weave::kSatinWeave}, 0, pitch, shift_u,
                   shift_v);
      canvas.paint_columns(sett(bands), pitch, shift_u);
      transpose = d.chance(0.5);
      break;
    }
    case kChecks: {
      const int64_t n = d.integer(2, 5);
      const std::vector<Colour> threads = sett({{pal.accent, n}, {pal.ground, n}});
      canvas.weave(threads, threads, Weave{}, 0.42f, pitch * d.integer(1, 2), shift_u, shift_v);
      break;
    }
    case kPlaid: {
      const Colour dark = mix(pal.accent, Colour{0, 0, 0}, 0.45f);
      std::vector<std::pair<Colour, int64_t>> half = {{pal.ground, d.integer(4, 8)},
                                                      {pal.third, d.integer(1, 2)},
                                                      {pal.ground, d.integer(1, 3)},
                                                      {pal.accent, d.integer(3, 7)},
                                                      {dark, d.integer(1, 3)}};
      if (d.chance(0.5)) half.insert(half.begin() + 3, {pal.third, 1});
      // Mirrored about both ends, as tartan setts are.
      std::vector<std::pair<Colour, int64_t>> bands = half;
      for (size_t k = half.size() - 1; k-- > 1;) bands.push_back(half[k]);
      const std::vector<Colour> threads = sett(bands);
      canvas.weave(threads, threads, Weave{Weave::kTwillWeave, 2, 4}, 0.3f, pitch, shift_u,
                   shift_v);
      break;
    }
    case kTwill: {
      Weave w{Weave::kTwillWeave, 2, 4};
      const int64_t kind = d.integer(0, 2);
      if (kind == 1) w.up = 3;
      if (kind == 2) w.repeat = 3;
      canvas.weave({pal.accent}, {pal.ground}, w, 0.12f, pitch * d.integer(1, 2), shift_u, shift_v);
      break;
    }
    case kHerringbone: {
      const int64_t scale = d.integer(1, 2);
      Weave w{Weave::kTwillWeave, 2, 4, scale == 1 ? d.integer(4, 6) : d.integer(3, 4)};
      canvas.weave({pal.accent}, {pal.ground}, w, 0.12f, pitch * scale, shift_u, shift_v);
      transpose = d.chance(0.5);
      break;
    }
    case kHoundstooth: {
      const std::vector<Colour> threads = sett({{pal.accent, 4}, {pal.ground, 4}});
      // Colour and weave keep their relative phase: shift by whole repeats of both (8).
      canvas.weave(threads, threads, Weave{Weave::kTwillWeave, 2, 4}, 0.05f,
                   pitch * d.integer(1, 2), 8 * d.integer(0, 7), 8 * d.integer(0, 7));
      break;
    }
    case kDots: {
      canvas.weave({pal.ground}, {pal.ground}, Weave{}, 0, pitch, shift_u, shift_v);
      const double spacing = d.uniform(6, 11) * pitch;
      const double radius = spacing * d.uniform(0.17, 0.3);
      const bool staggered = d.chance(0.5), two_colours = d.chance(0.25);
      const double ox = d.uniform(0, spacing), oy = d.uniform(0, spacing);
      for (int64_t y = 0; y < size; ++y)
        for (int64_t x = 0; x < size; ++x) {
          const int64_t j0 = static_cast<int64_t>(std::floor((y + 0.5 - oy) / spacing));
          double nearest = 1e9;
          int64_t which = 0;
          for (int64_t j = j0 - 1; j <= j0 + 1; ++j) {
            const double shift = staggered && (j & 1) ? spacing / 2 : 0;
            const int64_t i0 = static_cast<int64_t>(std::floor((x + 0.5 - ox - shift) / spacing));
            for (int64_t i = i0 - 1; i <= i0 + 1; ++i) {
              const double dist =
                  std::hypot(x + 0.5 - (ox + shift + i * spacing), y + 0.5 - (oy + j * spacing));
              if (dist < nearest) nearest = dist, which = i + j;
            }
          }
          const double cover = std::min(1.0, std::max(0.0, radius + 0.5 - nearest));
          const Colour ink = two_colours && (which & 1) ? pal.third : pal.accent;
          canvas.at(x, y) = mix(canvas.at(x, y), ink, static_cast<float>(cover));
        }
      break;
    }
  }
  canvas.add_texture(texture);
  canvas.store(out, transpose, mirror);
}

}  // namespace

Dataset make_swatches(const SwatchOptions& options) {
  if (options.count < 1)
    raise(ErrorKind::kBadArgument,
          "swatches: count " + std::to_string(options.count) + " (need at least 1)");
  if (options.size < 16 || options.size > 256)
    raise(ErrorKind::kBadArgument,
          "swatches: size " + std::to_string(options.size) + " (need 16 to 256 pixels)");
  const int64_t n = options.count, size = options.size;
  const int64_t families = static_cast<int64_t>(swatch_families().size());
  Dataset data;
  data.samples = Tensor<float>::uninitialised({n, 3, size, size});
  data.class_names = swatch_families();
  data.labels.resize(static_cast<size_t>(n));
  for (int64_t i = 0; i < n; ++i) data.labels[i] = i % families;
  data.origin = "swatches (" + std::to_string(n) + " of " + std::to_string(size) + "x" +
                std::to_string(size) + ", seed " + std::to_string(options.seed) + ")";
  const uint64_t stream = derive_stream(options.seed, "swatches");
  float* out = data.samples.mutable_data();
  parallel_for(n, true, [&](int64_t i) {
    Rng rng(options.seed, stream);
    rng.set_position(static_cast<uint64_t>(i) << 32);
    draw_swatch(static_cast<Family>(i % families), size, rng, out + i * 3 * size * size);
  });
  return data;
}

}  // namespace spar
