#include "export/c_header.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "engine/error.h"

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

struct DenseLayer {
  int64_t in = 0, out = 0;
  const Tensor<float>* matrix = nullptr;  // [in, out]
  const Tensor<float>* offset = nullptr;  // [out]
  bool relu = false;                      // followed by relu
};

// The mlp generator's layers, read from its parameters: hidden1 ... hiddenD, then out, each
// a matrix and an offset (recipes/architectures.cpp). Anything else is refused.
std::vector<DenseLayer> mlp_layers(const SavedGenerator& g) {
  std::vector<NamedTensor<float>> params = g.pair.generator->all_parameters("generator");
  const int64_t depth = g.recipe.model.depth;
  if (static_cast<int64_t>(params.size()) != 2 * (depth + 1))
    raise(ErrorKind::kBadArgument, "export: the mlp generator has " +
                                       std::to_string(params.size()) +
                                       " parameter tensors, not the 2 per layer expected");
  std::vector<DenseLayer> layers;
  for (int64_t i = 0; i <= depth; ++i) {
    const std::string layer =
        i < depth ? "generator/hidden" + std::to_string(i + 1) : "generator/out";
    const NamedTensor<float>& m = params[static_cast<size_t>(2 * i)];
    const NamedTensor<float>& b = params[static_cast<size_t>(2 * i + 1)];
    if (m.name != layer + "/matrix" || b.name != layer + "/offset" ||
        m.tensor->shape().rank() != 2 || b.tensor->shape() != Shape{m.tensor->shape()[1]})
      raise(ErrorKind::kBadArgument,
            "export: unexpected mlp generator tensors '" + m.name + "' and '" + b.name + "'");
    layers.push_back({m.tensor->shape()[0], m.tensor->shape()[1], m.tensor, b.tensor, i < depth});
  }
  return layers;
}

void array(std::ostringstream& out, const std::string& name, const Tensor<float>& t) {
  out << "static const float " << name << "[" << t.element_count() << "] = {";
  for (int64_t i = 0; i < t.element_count(); ++i) {
    if (!std::isfinite(t.data()[i]))
      raise(ErrorKind::kBadArgument, "export: " + name + " holds a non-finite weight");
    out << (i % 6 == 0 ? "\n    " : " ") << hex_float(t.data()[i]) << ",";
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
  if (g.recipe.model.kind != "mlp")
    raise(ErrorKind::kBadArgument, "export: model.kind " + g.recipe.model.kind +
                                       " cannot be exported yet; the exporter writes mlp "
                                       "generators (points and tables)");
  const std::vector<DenseLayer> layers = mlp_layers(g);
  const std::string P = upper(p);
  const int64_t latent = g.pair.latent, classes = g.pair.classes;
  const int64_t outputs = g.sample_shape.element_count();
  int64_t widest = 1;
  for (const DenseLayer& l : layers) widest = std::max(widest, l.out);
  if (layers.front().in != latent + classes || layers.back().out != outputs)
    raise(ErrorKind::kBadArgument,
          "export: the generator's layers do not fit its latent size "
          "and sample shape");

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
    << "#define " << P << "_SCRATCH_BYTES (" << 2 * widest << " * sizeof(float))\n\n"
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
  for (size_t i = 0; i < layers.size(); ++i) {
    array(h, p + "_matrix" + std::to_string(i), *layers[i].matrix);
    array(h, p + "_offset" + std::to_string(i), *layers[i].offset);
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

/* y = x W + b, W row-major [n_in][n_out]; the row `extra` of W is added too when it is a
   row (a class's one-hot input), and relu applied when `relu`. */
static void )"
    << p << R"(_dense(const float* x, int n_in, int extra, const float* w,
                       const float* b, int n_out, int relu, float* y) {
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
  for (o = 0; o < n_out; ++o) {
    y[o] += b[o];
    if (relu && !(y[o] > 0.0f)) y[o] = 0.0f;
  }
}

void )"
    << p << R"(_generate(const float* z, int class_index, float* out, void* scratch) {
  float* a = (float*)scratch;
  float* b = a + )"
    << widest << R"(;
  const float* x = z;
  int extra = -1;
  (void)b;
)";
  if (classes > 0)
    h << "  if (class_index >= 0 && class_index < " << classes << ") extra = " << latent
      << " + class_index;\n";
  else
    h << "  (void)class_index;\n";
  for (size_t i = 0; i < layers.size(); ++i) {
    const bool last = i + 1 == layers.size();
    const std::string to = last ? "out" : (i % 2 == 0 ? "a" : "b");
    const int64_t in = i == 0 ? latent : layers[i].in;
    h << "  " << p << "_dense(x, " << in << ", " << (i == 0 ? "extra" : "-1") << ", " << p
      << "_matrix" << i << ", " << p << "_offset" << i << ", " << layers[i].out << ", "
      << (layers[i].relu ? 1 : 0) << ", " << to << ");\n";
    if (!last) h << "  x = " << to << ";\n";
  }
  h << "}\n#endif /* " << P << "_IMPLEMENTATION */\n";
  return h.str();
}

}  // namespace spar
