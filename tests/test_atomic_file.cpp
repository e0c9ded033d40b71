// Tests of engine/atomic_file.h: a file is replaced whole or not at all (POSIX rename(2)
// replaces the target in one step), and every failure names the path and the system's reason
// (strerror) and leaves no temporary file behind.
#include <dirent.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <catch2/catch.hpp>
#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "engine/atomic_file.h"
#include "engine/error.h"
#include "tests/support.h"

namespace {

using spar::ByteSink;
using spar::ErrorKind;
using spar::write_file_atomically;
using spar::testing::error_kind_of;
using spar::testing::folder_entries;
using spar::testing::new_temp_folder;
using spar::testing::read_bytes;

std::string temporary_name(const std::string& path) {
  return path + ".tmp-" + std::to_string(static_cast<long>(getpid()));
}

}  // namespace

TEST_CASE("write_file_atomically writes the bytes whole and leaves no temporary file",
          "[atomic_file]") {
  const std::string folder = new_temp_folder("spar-atomic-file-test");
  const std::string path = folder + "/file.bin";
  const std::string first("first\0bytes", 11);  // any bytes, a zero byte included
  write_file_atomically(path, first.data(), first.size());
  CHECK(read_bytes(path) == first);
  CHECK(folder_entries(folder) == std::vector<std::string>{"file.bin"});

  write_file_atomically(path, "second", 6);  // replaces the file, shorter than before
  CHECK(read_bytes(path) == "second");
  write_file_atomically(path, nullptr, 0);  // nothing at all: an empty file
  CHECK(read_bytes(path).empty());

  // From a producer: its pieces, in order.
  write_file_atomically(path, [](const ByteSink& sink) {
    sink("ab", 2);
    sink("", 0);
    sink("cde", 3);
  });
  CHECK(read_bytes(path) == "abcde");
  CHECK(folder_entries(folder) == std::vector<std::string>{"file.bin"});
  std::remove(path.c_str());
  CHECK(rmdir(folder.c_str()) == 0);
}

TEST_CASE("write_file_atomically leaves the old file as it was when it fails", "[atomic_file]") {
  const std::string folder = new_temp_folder("spar-atomic-file-test");
  const std::string path = folder + "/state.bin";
  write_file_atomically(path, "old contents", 12);
  std::string message;

  SECTION("a folder that does not exist") {
    const std::string missing = folder + "/no/such/folder/x.bin";
    CHECK(error_kind_of([&] { write_file_atomically(missing, "x", 1); }, &message) ==
          ErrorKind::kIo);
    CHECK(message.rfind(missing + ": ", 0) == 0);
    CHECK(message.find(std::strerror(ENOENT)) != std::string::npos);
  }
  SECTION("the temporary name cannot be created") {
    const std::string blocker = temporary_name(path);
    REQUIRE(mkdir(blocker.c_str(), 0700) == 0);
    CHECK(error_kind_of([&] { write_file_atomically(path, "new", 3); }, &message) ==
          ErrorKind::kIo);
    CHECK(message.rfind(path + ": ", 0) == 0);
    CHECK(message.find(std::strerror(EISDIR)) != std::string::npos);
    CHECK(read_bytes(path) == "old contents");
    rmdir(blocker.c_str());
  }
  SECTION("the rename fails: the temporary file is removed") {
    const std::string target = folder + "/occupied";  // a folder that is not empty
    REQUIRE(mkdir(target.c_str(), 0700) == 0);
    const std::string inside = target + "/keep";
    std::ofstream(inside) << "x";
    CHECK(error_kind_of([&] { write_file_atomically(target, "new", 3); }, &message) ==
          ErrorKind::kIo);
    CHECK(message.rfind(target + ": ", 0) == 0);
    CHECK(message.find("rename") != std::string::npos);
    CHECK(folder_entries(folder) == std::vector<std::string>{"occupied", "state.bin"});
    CHECK(read_bytes(inside) == "x");
    std::remove(inside.c_str());
    rmdir(target.c_str());
  }
  SECTION("a producer that fails half way: its error, unchanged") {
    const auto produce = [](const ByteSink& sink) {
      sink("partial", 7);
      spar::raise(ErrorKind::kBadArgument, "producer gave up");
    };
    CHECK(error_kind_of([&] { write_file_atomically(path, produce); }, &message) ==
          ErrorKind::kBadArgument);
    CHECK(message == "producer gave up");
  }
  CHECK(read_bytes(path) == "old contents");
  CHECK(folder_entries(folder) == std::vector<std::string>{"state.bin"});
  std::remove(path.c_str());
  CHECK(rmdir(folder.c_str()) == 0);
}
