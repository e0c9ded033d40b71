// Exporting a trained generator as one dependency-free C99 header (`spar export --c-header`):
// its weights as exact float literals, its forward pass as plain loops, and spar's own latent
// draw (Philox4x32-10 and Box–Muller), so that a program with nothing but a C compiler draws
// the samples `spar sample` draws. The header's opening comment is its manual; the layout is
// described in docs/embedding.md.
//
// Exportable: every generator spar builds (recipes/architectures.h), unconditional or class-
// conditional: the mlp (points, tables) and the DCGAN-style ones for 28, 32 and 64 pixels,
// with batch normalisation folded into the layer before it; float32 weights. A generator
// whose tensors are not those of its recipe's architecture is refused by name, never
// exported wrongly.
//
// Thread safety: pure functions of the generator.
#pragma once

#include <string>

#include "recipes/saved_generator.h"

namespace spar {

struct CHeaderOptions {
  // The prefix of every name the header defines: "gen" gives gen_generate, GEN_SCRATCH_BYTES,
  // GEN_IMPLEMENTATION. A C identifier: a letter or '_', then letters, digits or '_'.
  std::string prefix = "gen";
  // The header's file name, as its manual tells users to include it.
  std::string file_name = "gen.h";
};

// The header's text. Raises kBadArgument for a prefix that is not a C identifier, and for a
// generator the exporter cannot write (naming its model.kind).
std::string c_header(const SavedGenerator& generator, const CHeaderOptions& options);

}  // namespace spar
