// Fuzz target: images through spar's loader (load_images, recipes/datasets.h), on a
// temporary folder that holds one file. The first input byte b chooses the file's name and
// the options: x.png, x.jpg or x.bmp by b % 3, 3 or 1 channels by (b / 3) % 2, an output side
// of 1, 7 or 32 pixels by (b / 6) % 3; the rest of the input is the file's bytes. An accepted
// image gives one sample of the asked shape with values in [−1, 1].
// The pixel limit is 2^20 here, not the default 40 million: stb decodes a truncated file to
// the full size its header claims, so a 126-byte BMP claiming 3 × 8,323,074 pixels took 0.34 s
// in a Release build and over the fuzzer's 10 s under its instrumentation, which is not a hang.
// The regressions of images claiming gigapixels are refused from the header under this limit
// too; tests/test_image_folders.cpp checks the refusal at the default limit.
#include <string>

#include "fuzz_support.h"
#include "recipes/datasets.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  if (size == 0) return 0;
  static const char* const kNames[] = {"images/x.png", "images/x.jpg", "images/x.bmp"};
  static const int64_t kSides[] = {1, 7, 32};
  const uint8_t choice = data[0];
  for (const char* name : kNames) fuzz::remove_scratch(name);
  fuzz::write_scratch(kNames[choice % 3], data + 1, size - 1);
  ImageLoadOptions options;
  options.channels = (choice / 3) % 2 == 0 ? 3 : 1;
  options.size = kSides[(choice / 6) % 3];
  options.pixel_limit = int64_t{1} << 20;
  fuzz::run_reader("load_images", [&] {
    const Dataset d = load_images(fuzz::scratch_dir() + "/images", options);
    if (d.samples.shape() != Shape{1, options.channels, options.size, options.size}) {
      fuzz::finding("load_images: one image gave samples of shape " + d.samples.shape().str());
    }
    fuzz::require_unit_range(d.samples, "load_images");
  });
  return 0;
}
