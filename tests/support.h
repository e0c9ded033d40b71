// Helpers shared by the tests.
#pragma once

#include <unistd.h>

#include <algorithm>
#include <catch2/catch.hpp>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <iterator>
#include <string>
#include <vector>

#include "engine/error.h"
#include "engine/tensor.h"

namespace spar {
namespace testing {

// The kind of spar::Error that `fn` raises (its message into *message when given). Any
// other exception (std::bad_alloc from an absurd allocation, say) or none at all fails.
inline ErrorKind error_kind_of(const std::function<void()>& fn, std::string* message = nullptr) {
  try {
    fn();
  } catch (const Error& e) {
    if (message) *message = e.what();
    return e.kind();
  } catch (const std::exception& e) {
    FAIL("expected spar::Error, got std::exception: " << e.what());
  }
  FAIL("expected spar::Error, nothing was raised");
  return ErrorKind::kIo;  // not reached
}

// `load` raises kBadInputFile in one line whose message contains `culprit` (a path, or
// "<path>:<line>:" for tables).
inline void require_bad_input(const std::function<void()>& load, const std::string& culprit) {
  std::string message;
  CHECK(error_kind_of(load, &message) == ErrorKind::kBadInputFile);
  INFO("message: " << message);
  CHECK(message.find(culprit) != std::string::npos);
  CHECK(message.find('\n') == std::string::npos);
}

// Writes `bytes` to the file at `path` (replacing it) and returns the path.
inline std::string write_bytes(const std::string& path, const std::string& bytes) {
  std::ofstream out(path, std::ios::binary);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  REQUIRE(out.good());
  return path;
}

// The whole file's bytes ("" when it cannot be read).
inline std::string read_bytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

// The names in `folder`, sorted, without "." and "..".
inline std::vector<std::string> folder_entries(const std::string& folder) {
  std::vector<std::string> out;
  for (const auto& entry : std::filesystem::directory_iterator(folder))
    out.push_back(entry.path().filename().string());
  std::sort(out.begin(), out.end());
  return out;
}

// A new empty folder "/tmp/<prefix>-XXXXXX" (mkdtemp), left to the test to remove, for
// tests that check the folder is empty at the end.
inline std::string new_temp_folder(const std::string& prefix) {
  std::string pattern = "/tmp/" + prefix + "-XXXXXX";
  REQUIRE(::mkdtemp(pattern.data()) != nullptr);
  return pattern;
}

// Equal shapes and identical bytes (so NaN payloads and -0.0 count).
template <class T>
bool same_bits(const Tensor<T>& a, const Tensor<T>& b) {
  return a.shape() == b.shape() &&
         std::memcmp(a.data(), b.data(), static_cast<size_t>(a.element_count()) * sizeof(T)) == 0;
}

// A scratch folder for one test case under the system's temporary folder, removed with its
// contents when the object goes.
class ScratchDir {
 public:
  ScratchDir() {
    path_ = std::filesystem::temp_directory_path() /
            ("spar_test_" + std::to_string(::getpid()) + "_" + std::to_string(counter_++));
    std::filesystem::remove_all(path_);
    std::filesystem::create_directories(path_);
  }
  ~ScratchDir() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  ScratchDir(const ScratchDir&) = delete;
  ScratchDir& operator=(const ScratchDir&) = delete;
  // The path of `name` inside the folder; its parent folders are created.
  std::string file(const std::string& name) const {
    const std::filesystem::path p = path_ / name;
    std::filesystem::create_directories(p.parent_path());
    return p.string();
  }
  // The path of folder `name` inside the folder, created.
  std::string folder(const std::string& name) const {
    std::filesystem::create_directories(path_ / name);
    return (path_ / name).string();
  }

 private:
  static inline int counter_ = 0;
  std::filesystem::path path_;
};

}  // namespace testing
}  // namespace spar
