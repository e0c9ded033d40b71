// The built-in demo scenario: procedural fabric swatches. A weaving mill wants endless new
// swatch designs; spar ships this generator of small RGB swatches, each labelled by its
// family, so a GAN can be trained and watched without any data file.
//
// Most families are woven on a simulated loom: every pixel column carries a warp thread and
// every row a weft thread (a thread is size/32 pixels wide, rounded, at least 1), each with a
// colour from a repeating sequence, and the weave (plain, twill, satin) decides which of
// the two shows at each crossing. A light thread-level texture (per-thread shade, per-pixel
// yarn noise, the weave's relief) makes them look woven. Families, in label order:
//   0 plain        one colour, heathered, with occasional slubs (short thick weft streaks)
//   1 stripes      bands of 2 or 3 colours along the warp or the weft, in a repeating order
//   2 checks       gingham: equal bands of two colours in warp and weft, mixed where they cross
//   3 plaid        an uneven mirrored sequence of 3 colours with thin lines, on a 2/2 twill
//   4 twill        a twill of contrasting warp and weft: diagonal ribs, left or right hand
//   5 herringbone  twill whose direction reverses in bands, giving zigzag columns (or rows)
//   6 houndstooth  2/2 twill with 4 dark and 4 light threads in warp and weft: broken checks
//   7 dots         round dots on a square or staggered grid over a plain weave ground
// Each swatch draws its own palette (a ground, an accent of contrasting lightness and a third
// colour), scale, phase and orientation.
//
// Thread safety: make_swatches is reentrant; it spreads its work over spar's threads
// (engine/parallel.h) and gives the same bits for any thread count.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "recipes/datasets.h"

namespace spar {

struct SwatchOptions {
  int64_t count = 8192;  // swatches to make, at least 1
  int64_t size = 32;     // side in pixels, 16 to 256; 28, 32 and 64 are the usual ones
  uint64_t seed = 1;     // the same options always give the same bits
};

// The family names, in label order (see the top of this file).
const std::vector<std::string>& swatch_families();

// `count` swatches [count, 3, size, size] in [−1, 1] (channel-major RGB). Swatch i is of
// family i mod K (K = swatch_families().size()), so the classes are balanced to within one
// and DatasetSource shuffles them anyway. Swatch i draws everything from Rng(seed,
// derive_stream(seed, "swatches")) starting at block i · 2^32, so it does not depend on
// `count`. Raises kBadArgument naming the value unless count ≥ 1 and 16 ≤ size ≤ 256.
Dataset make_swatches(const SwatchOptions& options);

}  // namespace spar
