// Fuzz target: archive bytes (checkpoints, engine/archive.h) through Archive::from_bytes.
// The input is the file's bytes. Besides crashes and sanitizer reports it checks the format's
// promise that from_bytes and to_bytes are exact inverses: an archive the reader accepts
// writes back to the very bytes it was read from, and every record reads as its kind.
// Under libFuzzer the mutator fixes each record's CRC after mutating (fuzz_support.h), so
// the inputs stay real archive files that `spar inspect` can be pointed at.
#include <string>

#include "engine/archive.h"
#include "fuzz_support.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  const std::string bytes(reinterpret_cast<const char*>(data), size);
  fuzz::run_reader("Archive::from_bytes", [&] {
    const Archive archive = Archive::from_bytes(bytes, "fuzz input");
    if (archive.to_bytes() != bytes) {
      fuzz::finding("an accepted archive does not write back to the bytes it was read from");
    }
    for (const std::string& name : archive.names()) {
      switch (archive.kind(name)) {
        case RecordKind::kFloat32Tensor:
          archive.tensor<float>(name);
          break;
        case RecordKind::kFloat64Tensor:
          archive.tensor<double>(name);
          break;
        case RecordKind::kInteger:
          archive.integer(name);
          break;
        case RecordKind::kText:
          archive.text(name);
          break;
      }
    }
  });
  return 0;
}

#ifdef SPAR_LIBFUZZER
extern "C" size_t LLVMFuzzerCustomMutator(uint8_t* data, size_t size, size_t max_size,
                                          unsigned int seed) {
  return spar::fuzz::mutate_archive(data, size, max_size, seed);
}
#endif
