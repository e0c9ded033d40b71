#include "export/c_header.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <map>
#include <sstream>
#include <vector>

#include "engine/error.h"
#include "layers/normalisation.h"

namespace spar {
namespace {

bool is_c_identifier(const std::string& s) {
  if (s.empty() || !(std::isalpha(static_cast<unsigned char>(s[0])) || s[0] == '_')) return false;
  return std::all_of(s.begin(), s.end(), [](char c) {
    return std::isalnum(static_cast<unsigned char>(c)) || c == '_';
  });
}

std::string upper(std::string s) {
  for (char& c : s) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return s;
}

// A float as a C99 hexadecimal floating constant: exact, since every float is a double and
// %a prints a double's bits exactly.
std::string hex_float(float v) {
  char text[48];
  std::snprintf(text, sizeof text, "%af", static_cast<double>(v));
  return text;
}

// A C string literal: printable ASCII as it is, everything else as octal escapes.
std::string c_string(const std::string& s) {
  std::string out = "\"";
  for (unsigned char c : s) {
    if (c == '"' || c == '\\') {
      out += '\\';
      out += static_cast<char>(c);
    } else if (c >= 0x20 && c < 0x7F && c != '?') {  // '?' too: no trigraphs
      out += static_cast<char>(c);
    } else {
      char code[8];
      std::snprintf(code, sizeof code, "\\%03o", c);
      out += code;
    }
  }
  return out + "\"";
}

enum class Activation { kNone, kRelu, kTanh };

// One step of the generator's forward pass as the header computes it: a dense layer on a
// vector, or a transposed convolution with 4x4 kernels, stride 2 and padding 1 (which
// doubles the map's sides) on a [channels, height, width] map; weights with batch
// normalisation already folded in.
struct Step {
  bool convolution = false;
  int64_t in = 0, out = 0;        // dense: features; convolution: channels
  int64_t height = 0, width = 0;  // convolution: the input map's sides
  std::vector<float> weights;     // dense [in, out]; convolution [in, out, 4, 4]
  std::vector<float> offset;      // [out]
  Activation activation = Activation::kNone;
  int64_t output_size() const { return convolution ? out * 4 * height * width : out; }
};

// The generator's tensors by name, parameters and state alike.
std::map<std::string, const Tensor<float>*> tensors_of(const SavedGenerator& g) {
  std::map<std::string, const Tensor<float>*> named;
  for (const NamedTensor<float>& t : g.pair.generator->all_parameters("generator"))
    named[t.name] = t.tensor;
  for (const NamedTensor<float>& t : g.pair.generator->all_state("generator"))
    named[t.name] = t.tensor;
  return named;
}

const Tensor<float>& need(const std::map<std::string, const Tensor<float>*>& named,
                          const std::string& name, const Shape& shape) {
  const auto it = named.find(name);
  if (it == named.end() || it->second->shape() != shape)
    raise(ErrorKind::kBadArgument, "export: the generator has no tensor '" + name + "' of shape " +
                                       shape.str() +
                                       " (an architecture the exporter does not know)");
  return *it->second;
}

std::vector<float> values(const Tensor<float>& t) {
  return std::vector<float>(t.data(), t.data() + t.element_count());
}

// The mlp generator: hidden1 ... hiddenD (dense, relu), then out (dense); architectures.cpp.
std::vector<Step> mlp_plan(const SavedGenerator& g) {
  const auto named = tensors_of(g);
  std::vector<Step> steps;
  int64_t in = g.pair.latent + g.pair.classes;
  const int64_t depth = g.recipe.model.depth, width = g.recipe.model.width;
  for (int64_t i = 0; i <= depth; ++i) {
    const std::string layer =
        i < depth ? "generator/hidden" + std::to_string(i + 1) : "generator/out";
    Step s;
    s.in = in;
    s.out = i < depth ? width : g.sample_shape.element_count();
    s.weights = values(need(named, layer + "/matrix", Shape{s.in, s.out}));
    s.offset = values(need(named, layer + "/offset", Shape{s.out}));
    s.activation = i < depth ? Activation::kRelu : Activation::kNone;
    steps.push_back(s);
    in = s.out;
  }
  return steps;
}

// Evaluation-mode batch normalisation y = γ(x − μ)/√(σ² + ε) + β folded into the step before
// it (common practice): per output channel c, the weights times s = γ/√(σ² + ε) and the
// offset (b − μ)·s + β, computed in double and rounded once. ε as the layer uses it.
void fold_normalisation(Step& step, const std::map<std::string, const Tensor<float>*>& named,
                        const std::string& norm, int64_t channels, int64_t per_channel) {
  const Shape c{channels};
  const Tensor<float>& scale = need(named, norm + "/scale", c);
  const Tensor<float>& shift = need(named, norm + "/shift", c);
  const Tensor<float>& mean = need(named, norm + "/population_mean", c);
  const Tensor<float>& variance = need(named, norm + "/population_variance", c);
  const double epsilon = BatchNormalisationOptions{}.epsilon;
  if (step.offset.empty()) step.offset.assign(static_cast<size_t>(step.out), 0.0f);
  // The step's outputs: dense feature o belongs to channel o / per_channel; a convolution's
  // output channel o is channel o.
  for (int64_t o = 0; o < step.out; ++o) {
    const int64_t ch = step.convolution ? o : o / per_channel;
    const double s = static_cast<double>(scale.data()[ch]) /
                     std::sqrt(static_cast<double>(variance.data()[ch]) + epsilon);
    step.offset[static_cast<size_t>(o)] = static_cast<float>(
        (static_cast<double>(step.offset[static_cast<size_t>(o)]) - mean.data()[ch]) * s +
        shift.data()[ch]);
    if (step.convolution) {  // [in, out, 4, 4]: every (c, o, ky, kx)
      for (int64_t c_in = 0; c_in < step.in; ++c_in)
        for (int64_t k = 0; k < 16; ++k) {
          float& w = step.weights[static_cast<size_t>((c_in * step.out + o) * 16 + k)];
          w = static_cast<float>(w * s);
        }
    } else {  // [in, out]: column o
      for (int64_t r = 0; r < step.in; ++r) {
        float& w = step.weights[static_cast<size_t>(r * step.out + o)];
        w = static_cast<float>(w * s);
      }
    }
  }
}

// The DCGAN-style generator (architectures.cpp, make_dcgan_pair): project (dense, no bias),
// norm0, relu, then up1 ... upD (transposed convolutions; batch normalisation and relu
// between, the last with a bias and tanh).
std::vector<Step> dcgan_plan(const SavedGenerator& g) {
  const int64_t size = g.sample_shape[1], channels = g.sample_shape[0];
  const int doublings = size == 28 ? 2 : size == 32 ? 3 : size == 64 ? 4 : 0;
  if (doublings == 0 || g.sample_shape[2] != size)
    raise(ErrorKind::kBadArgument, "export: dcgan samples of shape " + g.sample_shape.str() +
                                       " (28, 32 or 64 pixels expected)");
  const int64_t start = size == 28 ? 7 : 4;
  const int64_t top = g.recipe.model.width << (doublings - 1);
  const auto named = tensors_of(g);
  std::vector<Step> steps;
  Step project;
  project.in = g.pair.latent + g.pair.classes;
  project.out = top * start * start;
  project.weights = values(need(named, "generator/project/matrix", Shape{project.in, project.out}));
  fold_normalisation(project, named, "generator/norm0", top, start * start);
  project.activation = Activation::kRelu;
  steps.push_back(project);
  int64_t c = top, side = start;
  for (int i = 1; i <= doublings; ++i) {
    const bool last = i == doublings;
    const std::string up = "generator/up" + std::to_string(i);
    Step s;
    s.convolution = true;
    s.in = c;
    s.out = last ? channels : c / 2;
    s.height = s.width = side;
    s.weights = values(need(named, up + "/filters", Shape{s.in, s.out, 4, 4}));
    if (last) {
      s.offset = values(need(named, up + "/offset", Shape{s.out}));
      s.activation = Activation::kTanh;
    } else {
      fold_normalisation(s, named, "generator/norm" + std::to_string(i), s.out, 1);
      s.activation = Activation::kRelu;
    }
    steps.push_back(s);
    c = s.out;
    side *= 2;
  }
  return steps;
}

void array(std::ostringstream& out, const std::string& name, const std::vector<float>& v) {
  out << "static const float " << name << "[" << v.size() << "] = {";
  for (size_t i = 0; i < v.size(); ++i) {
    if (!std::isfinite(v[i]))
      raise(ErrorKind::kBadArgument, "export: " + name + " holds a non-finite weight");
    out << (i % 6 == 0 ? "\n    " : " ") << hex_float(v[i]) << ",";
  }
  out << "\n};\n";
}

}  // namespace

std::string c_header(const SavedGenerator& g, const CHeaderOptions& options) {
  const std::string& p = options.prefix;
  if (!is_c_identifier(p))
    raise(
        ErrorKind::kBadArgument,
        "--prefix: \"" + p + "\" is not a C identifier (a letter or _, then letters, digits or _)");
  std::vector<Step> steps;
  if (g.recipe.model.kind == "mlp")
    steps = mlp_plan(g);
  else if (g.recipe.model.kind == "dcgan")
    steps = dcgan_plan(g);
  else
    raise(ErrorKind::kBadArgument, "export: model.kind " + g.recipe.model.kind +
                                       " cannot be exported: the exporter writes mlp and dcgan "
                                       "generators");
  const std::string P = upper(p);
  const int64_t latent = g.pair.latent, classes = g.pair.classes;
  const int64_t outputs = g.sample_shape.element_count();
  int64_t widest = 1, plane = 0;  // the largest step output; the largest convolution input map
  for (const Step& st : steps) {
    widest = std::max(widest, st.output_size());
    if (st.convolution) plane = std::max(plane, st.height * st.width);
  }
  if (steps.front().in != latent + classes || steps.back().output_size() != outputs)
    raise(ErrorKind::kBadArgument,
          "export: the generator's layers do not fit its latent size and sample shape");

  std::ostringstream h;
  h << "/* " << options.file_name
    << ": a trained generator, exported by spar (`spar export --c-header`).\n"
    << " *\n"
    << " * One self-contained C99 header: it needs only <stdint.h>, <stddef.h>, <string.h> and\n"
    << " * <math.h>, allocates nothing, keeps no mutable state (any number of threads may call\n"
    << " * it at once) and does no I/O. Declarations always; the implementation in the one file\n"
    << " * that defines " << P << "_IMPLEMENTATION before including it:\n"
    << " *     #define " << P << "_IMPLEMENTATION\n"
    << " *     #include \"" << options.file_name << "\"\n"
    << " * Link with the maths library (-lm).\n"
    << " *\n"
    << " *   void " << p << "_latent(uint64_t seed, uint64_t index, float* z);\n"
    << " *     Writes " << P << "_LATENT floats: the latent vector of sample `index` (from 0) of\n"
    << " *     `spar sample --seed seed`, bit for bit (spar's Philox4x32-10 and Box-Muller, with\n"
    << " *     the C library's logf, sqrtf, cosf and sinf: the same bits where they are the\n"
    << " *     same functions as spar's, as on glibc).\n"
    << " *   void " << p
    << "_generate(const float* z, int class_index, float* out, void* scratch);\n"
    << " *     Turns a latent vector into one sample of " << P
    << "_OUTPUT_SIZE floats (the values\n"
    << " *     `spar sample -o FILE.csv` writes, within 1e-5: sums run in another order than\n"
    << " *     spar's matrix products). `scratch` is " << P << "_SCRATCH_BYTES bytes, aligned as\n"
    << " *     for a float, owned by the caller (one per thread). "
    << (classes > 0 ? "class_index is the class, 0 to " + P + "_CLASSES - 1 (names in " + p +
                          "_class_names); another value adds no class."
                    : "class_index is ignored: pass -1.")
    << "\n"
    << " *\n"
    << " * Weights: float32, written exactly as hexadecimal constants. The generator is the\n"
    << " * weight-averaged one of step " << g.step << " (" << P << "_STEP); " << P
    << "_RECIPE_HASH is the FNV-1a\n"
    << " * 64-bit hash of its resolved recipe. Generated code: use it under the terms of the\n"
    << " * data and weights you trained it on; the code itself may be used without restriction.\n"
    << " */\n";
  h << "#ifndef " << P << "_H_INCLUDED\n#define " << P << "_H_INCLUDED\n\n"
    << "#include <stddef.h>\n#include <stdint.h>\n\n"
    << "#define " << P << "_LATENT " << latent << "\n"
    << "#define " << P << "_OUTPUT_SIZE " << outputs << "\n"
    << "#define " << P << "_OUTPUT_RANK " << g.sample_shape.rank() << "\n";
  for (int i = 0; i < g.sample_shape.rank(); ++i)
    h << "#define " << P << "_OUTPUT_DIM" << i << " " << g.sample_shape[i] << "\n";
  h << "#define " << P << "_CLASSES " << classes << "\n"
    << "#define " << P << "_STEP " << g.step << "\n"
    << "#define " << P << "_RECIPE_HASH \"" << recipe_hash(g.recipe) << "\"\n"
    << "#define " << P << "_SCRATCH_BYTES (" << 2 * widest + plane << " * sizeof(float))\n\n"
    << "#ifdef __cplusplus\nextern \"C\" {\n#endif\n";
  if (classes > 0) h << "extern const char* const " << p << "_class_names[" << classes << "];\n";
  h << "void " << p << "_latent(uint64_t seed, uint64_t index, float* z);\n"
    << "void " << p << "_generate(const float* z, int class_index, float* out, void* scratch);\n"
    << "#ifdef __cplusplus\n}\n#endif\n#endif /* " << P << "_H_INCLUDED */\n\n";

  h << "#if defined(" << P << "_IMPLEMENTATION) && !defined(" << P << "_IMPLEMENTED)\n"
    << "#define " << P << "_IMPLEMENTED\n#include <math.h>\n#include <string.h>\n\n";
  if (classes > 0) {
    h << "const char* const " << p << "_class_names[" << classes << "] = {";
    for (const std::string& name : g.class_names) h << "\n    " << c_string(name) << ",";
    h << "\n};\n\n";
  }
  bool any_convolution = false;
  for (size_t i = 0; i < steps.size(); ++i) {
    array(h, p + "_weights" + std::to_string(i), steps[i].weights);
    array(h, p + "_offset" + std::to_string(i), steps[i].offset);
    any_convolution |= steps[i].convolution;
  }
  // Philox4x32-10 (Salmon et al. 2011) on counter (block, stream) with key = the seed, as
  // engine/random.cpp draws; the stream is FNV-1a 64 of the seed's bytes and "sampling".
  const float two_pi = static_cast<float>(6.283185307179586476925286766559);
  h << R"(
static void )"
    << p << R"(_philox(uint32_t c[4], uint32_t k0, uint32_t k1) {
  int round;
  for (round = 1; round <= 10; ++round) {
    uint64_t p0, p1;
    uint32_t next0, next2;
    if (round > 1) {
      k0 += 0x9E3779B9u;
      k1 += 0xBB67AE85u;
    }
    p0 = (uint64_t)0xD2511F53u * c[0];
    p1 = (uint64_t)0xCD9E8D57u * c[2];
    next0 = (uint32_t)(p1 >> 32) ^ c[1] ^ k0;
    next2 = (uint32_t)(p0 >> 32) ^ c[3] ^ k1;
    c[0] = next0;
    c[1] = (uint32_t)p1;
    c[2] = next2;
    c[3] = (uint32_t)p0;
  }
}

void )"
    << p << R"(_latent(uint64_t seed, uint64_t index, float* z) {
  const char* purpose = "sampling";
  uint64_t stream = UINT64_C(0xcbf29ce484222325), block = 0, e;
  float normal[4] = {0, 0, 0, 0};
  int i, have = 0;
  for (i = 0; i < 8; ++i) stream = (stream ^ ((seed >> (8 * i)) & 0xFFu)) * UINT64_C(0x100000001b3);
  for (i = 0; purpose[i] != 0; ++i) stream = (stream ^ (unsigned char)purpose[i]) * UINT64_C(0x100000001b3);
  for (i = 0; i < )"
    << P << R"(_LATENT; ++i) {
    e = index * )"
    << P << R"(_LATENT + (uint64_t)i;
    if (!have || e / 4 != block) {
      uint32_t c[4];
      int k;
      block = e / 4;
      c[0] = (uint32_t)block;
      c[1] = (uint32_t)(block >> 32);
      c[2] = (uint32_t)stream;
      c[3] = (uint32_t)(stream >> 32);
      )"
    << p << R"(_philox(c, (uint32_t)seed, (uint32_t)(seed >> 32));
      for (k = 0; k < 4; k += 2) {
        /* Box-Muller: u1 in (0, 1] and u2 in [0, 1) from the top 24 bits of two words. */
        const float u1 = (float)((c[k] >> 8) + 1u) * 0x1p-24f;
        const float u2 = (float)(c[k + 1] >> 8) * 0x1p-24f;
        const float r = sqrtf(-2.0f * logf(u1));
        const float t = )"
    << hex_float(two_pi) << R"( * u2;
        normal[k] = 0.0f + 1.0f * (r * cosf(t));
        normal[k + 1] = 0.0f + 1.0f * (r * sinf(t));
      }
      have = 1;
    }
    z[i] = normal[e % 4];
  }
}

/* The activation after a step: 0 none, 1 relu, 2 tanh. */
static float )"
    << p << R"(_activate(float v, int activation) {
  if (activation == 1) return v > 0.0f ? v : 0.0f;
  if (activation == 2) return tanhf(v);
  return v;
}

/* y = x W + b, W row-major [n_in][n_out]; the row `extra` of W is added too when it is a
   row (a class's one-hot input), then the activation. */
static void )"
    << p << R"(_dense(const float* x, int n_in, int extra, const float* w,
                       const float* b, int n_out, int activation, float* y) {
  int i, o;
  for (o = 0; o < n_out; ++o) y[o] = 0.0f;
  for (i = 0; i < n_in; ++i) {
    const float xi = x[i];
    const float* row = w + (size_t)i * (size_t)n_out;
    for (o = 0; o < n_out; ++o) y[o] += xi * row[o];
  }
  if (extra >= 0) {
    const float* row = w + (size_t)extra * (size_t)n_out;
    for (o = 0; o < n_out; ++o) y[o] += row[o];
  }
  for (o = 0; o < n_out; ++o) y[o] = )"
    << p << R"(_activate(y[o] + b[o], activation);
}
)";
  if (any_convolution)
    h << R"(
/* The transposed convolution with 4x4 kernels, stride 2 and padding 1: x [n_in][h][w] to
   y [n_out][2h][2w], f [n_in][n_out][4][4]: y[o][oy][ox] = b[o] + the sum over c, ky, kx of
   x[c][iy][ix] f[c][o][ky][kx] where oy = 2 iy - 1 + ky and ox = 2 ix - 1 + kx. Computed per
   output channel and parity of (oy, ox): each parity is reached by 2 x 2 of the 16 taps, and
   for each input channel and tap one contiguous multiply-add over a row, into `sub` (h w
   floats of the caller's scratch); then the activation. */
static void )"
      << p << R"(_upsample(const float* x, int n_in, int h, int w, const float* f,
                          const float* b, int n_out, int activation, float* y, float* sub) {
  int o, py, px, c, ty, tx, a, col;
  for (o = 0; o < n_out; ++o)
    for (py = 0; py < 2; ++py)
      for (px = 0; px < 2; ++px) {
        for (a = 0; a < h * w; ++a) sub[a] = 0.0f;
        for (c = 0; c < n_in; ++c) {
          const float* xc = x + (size_t)c * (size_t)h * (size_t)w;
          for (ty = 0; ty < 2; ++ty) {
            const int ky = (py + 1) % 2 + 2 * ty, dy = (py + 1 - ky) / 2; /* iy = a + dy */
            for (tx = 0; tx < 2; ++tx) {
              const int kx = (px + 1) % 2 + 2 * tx, dx = (px + 1 - kx) / 2; /* ix = col + dx */
              const float wt = f[(((size_t)c * (size_t)n_out + (size_t)o) * 4 + (size_t)ky) * 4 + (size_t)kx];
              const int first = dx < 0 ? -dx : 0, end = dx > 0 ? w - dx : w;
              for (a = 0; a < h; ++a) {
                const int iy = a + dy;
                float* row = sub + (size_t)a * (size_t)w;
                const float* in;
                if (iy < 0 || iy >= h) continue;
                in = xc + (size_t)iy * (size_t)w;
                for (col = first; col < end; ++col) row[col] += wt * in[col + dx];
              }
            }
          }
        }
        for (a = 0; a < h; ++a)
          for (col = 0; col < w; ++col)
            y[((size_t)o * (size_t)(2 * h) + (size_t)(2 * a + py)) * (size_t)(2 * w) + (size_t)(2 * col + px)] =
                )"
      << p << R"(_activate(sub[(size_t)a * (size_t)w + (size_t)col] + b[o], activation);
      }
}
)";
  h << R"(
void )"
    << p << R"(_generate(const float* z, int class_index, float* out, void* scratch) {
  float* a = (float*)scratch;
  float* b = a + )"
    << widest << R"(;
  float* sub = b + )"
    << widest << R"(;
  const float* x = z;
  int extra = -1;
  (void)b;
  (void)sub;
)";
  if (classes > 0)
    h << "  if (class_index >= 0 && class_index < " << classes << ") extra = " << latent
      << " + class_index;\n";
  else
    h << "  (void)class_index;\n";
  for (size_t i = 0; i < steps.size(); ++i) {
    const Step& st = steps[i];
    const bool last = i + 1 == steps.size();
    const std::string to = last ? "out" : (i % 2 == 0 ? "a" : "b");
    const int activation = static_cast<int>(st.activation);
    if (st.convolution)
      h << "  " << p << "_upsample(x, " << st.in << ", " << st.height << ", " << st.width << ", "
        << p << "_weights" << i << ", " << p << "_offset" << i << ", " << st.out << ", "
        << activation << ", " << to << ", sub);\n";
    else
      h << "  " << p << "_dense(x, " << (i == 0 ? latent : st.in) << ", "
        << (i == 0 ? "extra" : "-1") << ", " << p << "_weights" << i << ", " << p << "_offset" << i
        << ", " << st.out << ", " << activation << ", " << to << ");\n";
    if (!last) h << "  x = " << to << ";\n";
  }
  h << "}\n#endif /* " << P << "_IMPLEMENTATION */\n";
  return h.str();
}

}  // namespace spar
