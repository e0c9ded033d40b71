// The replay program of a fuzz target: runs saved inputs through the target's entry function
// (LLVMFuzzerTestOneInput) in an ordinary build, without libFuzzer.
// Usage: spar_fuzz_replay_<target> FILE_OR_FOLDER...   (a folder: every file in it, sorted)
// Exits 0 when every input ran; a finding aborts (fuzz_support.h), a crash kills the process.
//
// libFuzzer stops an input at 2 GiB of memory and 10 s; here, so that a decompression bomb or
// a hang fails instead of passing slowly: memory is capped by the allocator limit under ASan,
// and by the address-space limit otherwise, and a hang ends at 120 s of CPU time (SIGXCPU).
// That is a bound on work done, not a wall-clock limit: a correct reader takes milliseconds.
#include <sys/resource.h>

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "fuzz_support.h"

#if defined(__SANITIZE_ADDRESS__)
#define SPAR_REPLAY_ASAN 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define SPAR_REPLAY_ASAN 1
#endif
#endif

#ifdef SPAR_REPLAY_ASAN
// Read by ASan at start-up (ASAN_OPTIONS given in the environment still apply after these).
extern "C" const char* __asan_default_options() {
  return "max_allocation_size_mb=2048";
}
#endif

namespace {

// Address space: libFuzzer's 2 GiB of data plus room for code, thread stacks and the
// allocator's reserve.
constexpr rlim_t kMemoryBytes = rlim_t{3} << 30;
constexpr rlim_t kCpuSeconds = 120;

void limit(int resource, rlim_t value) {
  rlimit r{};
  if (getrlimit(resource, &r) != 0) return;
  if (r.rlim_max != RLIM_INFINITY && r.rlim_max < value) value = r.rlim_max;
  r.rlim_cur = value;
  setrlimit(resource, &r);
}

std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) spar::fuzz::finding("cannot read " + path);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s FILE_OR_FOLDER...\n", argv[0]);
    return 2;
  }
#ifndef SPAR_REPLAY_ASAN
  limit(RLIMIT_AS, kMemoryBytes);
#endif
  limit(RLIMIT_CPU, kCpuSeconds);
  std::vector<std::string> inputs;
  for (int i = 1; i < argc; ++i) {
    const std::filesystem::path p(argv[i]);
    if (std::filesystem::is_directory(p)) {
      std::vector<std::string> files;
      for (const auto& entry : std::filesystem::directory_iterator(p)) {
        if (entry.is_regular_file()) files.push_back(entry.path().string());
      }
      std::sort(files.begin(), files.end());
      inputs.insert(inputs.end(), files.begin(), files.end());
    } else {
      inputs.push_back(p.string());
    }
  }
  for (const std::string& path : inputs) {
    std::fprintf(stderr, "replaying %s\n", path.c_str());
    const std::string bytes = read_file(path);
    LLVMFuzzerTestOneInput(reinterpret_cast<const uint8_t*>(bytes.data()), bytes.size());
  }
  std::printf("replayed %zu inputs\n", inputs.size());
  return inputs.empty() ? 1 : 0;
}
