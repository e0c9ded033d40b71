// Fuzz target: CSV tables, plain or gzipped (recipes/datasets.h), through load_table on a
// temporary file, once unlabelled and once with the last column as the label and a header
// line. The input is the file's bytes. An accepted table holds finite samples in [−1, 1]
// and labels within its classes. Under libFuzzer, gzipped inputs are mostly mutated after
// inflating and compressed again (fuzz_support.h).
#include <string>

#include "fuzz_support.h"
#include "recipes/datasets.h"

namespace {

void check(const spar::Dataset& d, const char* what) {
  spar::fuzz::require_unit_range(d.samples, what);
  for (int64_t label : d.labels) {
    if (label < 0 || label >= d.classes()) {
      spar::fuzz::finding(std::string(what) + ": label " + std::to_string(label) + " of " +
                          std::to_string(d.classes()) + " classes");
    }
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  const std::string path = fuzz::write_scratch("table.csv", data, size);
  fuzz::run_reader("load_table", [&] { check(load_table(path, TableOptions{}), "load_table"); });
  TableOptions labelled;
  labelled.label_column = -1;
  labelled.header = true;
  fuzz::run_reader("load_table (labelled)",
                   [&] { check(load_table(path, labelled), "load_table (labelled)"); });
  return 0;
}

#ifdef SPAR_LIBFUZZER
extern "C" size_t LLVMFuzzerCustomMutator(uint8_t* data, size_t size, size_t max_size,
                                          unsigned int seed) {
  return spar::fuzz::mutate_maybe_gzipped(data, size, max_size, seed);
}
#endif
