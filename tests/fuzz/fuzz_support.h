// Helpers shared by the fuzz targets in tests/fuzz (one file per reader of outside bytes).
//
// Each target defines the libFuzzer entry LLVMFuzzerTestOneInput and checks one reader.
// spar::Error is the expected outcome for bad input; anything else is a finding: a crash or
// a sanitizer report, any other exception (std::bad_alloc included), a hang, a result that
// breaks the reader's documented contract (a sample outside [−1, 1], an archive that does
// not write back to its own bytes). finding() prints one line and aborts, so libFuzzer
// saves the input and the replay program (replay_main.cpp) fails on it.
//
// The same files build two ways: with clang and -fsanitize=fuzzer as fuzzers (SPAR_FUZZ,
// scripts/fuzz), where SPAR_LIBFUZZER is defined and the targets may add a custom mutator;
// and with any compiler, linked with replay_main.cpp, as a program that runs saved inputs
// (the ctests over tests/fuzz/regressions and tests/fuzz/corpus).
//
// Thread safety: none; a fuzz target runs one input at a time.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <exception>
#include <string>

#include "engine/error.h"
#include "engine/tensor.h"

namespace spar {
namespace fuzz {

// Prints "spar fuzz finding: <what>" to stderr and aborts.
[[noreturn]] void finding(const std::string& what);

// Whether SPAR_FUZZ_VERBOSE is set (to anything but 0): run_reader then prints the message
// of each spar::Error, to see how an input was refused.
bool verbose();

// Runs `fn`, taking a spar::Error as the expected outcome for bad input. Returns true when
// `fn` returned normally, false when it raised spar::Error. Any other exception is a finding.
template <class Fn>
bool run_reader(const char* what, Fn&& fn) {
  try {
    fn();
    return true;
  } catch (const Error& e) {
    if (verbose()) std::fprintf(stderr, "%s: spar::Error: %s\n", what, e.what());
    return false;
  } catch (const std::exception& e) {
    finding(std::string(what) + ": an exception that is not spar::Error: " + e.what());
  } catch (...) {
    finding(std::string(what) + ": an exception that is not a std::exception");
  }
}

// A folder of this process for temporary files: $TMPDIR/spar-fuzz-<pid> when TMPDIR is set,
// else /dev/shm/spar-fuzz-<pid> (memory, no disk traffic), else /tmp/spar-fuzz-<pid>. Made on
// first use, reused for every input (the same paths each run), removed at normal exit.
const std::string& scratch_dir();
// Writes `size` bytes to scratch_dir()/`name` (replacing it) and returns the path.
std::string write_scratch(const std::string& name, const void* data, size_t size);
// Removes scratch_dir()/`name` if it exists.
void remove_scratch(const std::string& name);

// A finding unless every value is finite and within [−1, 1] (the Dataset contract).
void require_unit_range(const Tensor<float>& samples, const char* what);

// gzip (RFC 1952) through zlib. gunzip returns false for data that is not a complete gzip
// stream or inflates to more than `limit` bytes.
std::string gzip(const std::string& bytes);
bool gunzip(const std::string& bytes, std::string* out, size_t limit);

// Rewrites the CRC-32 of every record of an archive (docs/file-formats.md, "Archive") whose
// bytes are all present, walking the records as the format lays them out; bytes that do not
// parse as far as a record's CRC are left alone. With this a mutated archive still passes the
// CRC check and reaches the checks behind it.
void fix_archive_crcs(uint8_t* data, size_t size);

#ifdef SPAR_LIBFUZZER
// Mutators for the custom-mutator hook of libFuzzer (LLVMFuzzerCustomMutator).
// Gzipped input (1f 8b) is inflated, mutated and compressed again most of the time, so the
// fuzzer explores what the reader sees after decompression; otherwise the bytes themselves
// are mutated (damaged gzip streams, plain files).
size_t mutate_maybe_gzipped(uint8_t* data, size_t size, size_t max_size, unsigned int seed);
// The bytes are mutated, then the archive's CRCs are fixed most of the time (not always, so
// that the CRC check itself stays covered).
size_t mutate_archive(uint8_t* data, size_t size, size_t max_size, unsigned int seed);
#endif

}  // namespace fuzz
}  // namespace spar

// The libFuzzer entry point every target defines.
extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size);
