// spar::Error: the one error type of the library, and raise(), the one way to throw it.
//
// Every failure a caller can act on (a bad shape, a bad file, a bad recipe, a corrupt
// checkpoint, a numerical failure) is an Error carrying an ErrorKind and a one-line message
// built at the failure site that names the operation, file, key or value at fault.
// Programmer errors (broken internal invariants) are debug-build asserts instead.
// Thread safety: raise() may be called from any thread; Error is an immutable value.
#pragma once

#include <stdexcept>
#include <string>

namespace spar {

enum class ErrorKind {
  kBadShape,           // operands whose shapes do not fit the operation
  kBadArgument,        // a value outside the range an API accepts
  kBadInputFile,       // a data file that is missing, unreadable or malformed
  kBadRecipe,          // a recipe key or value that is unknown or of the wrong type
  kCorruptCheckpoint,  // a checkpoint that fails its length or CRC checks
  kNumericalFailure,   // a non-finite loss or gradient
  kIo,                 // the operating system refused a read or write
};

const char* to_string(ErrorKind kind);

class Error : public std::runtime_error {
 public:
  Error(ErrorKind kind, const std::string& message) : std::runtime_error(message), kind_(kind) {}
  ErrorKind kind() const { return kind_; }

 private:
  ErrorKind kind_;
};

// Throws Error{kind, message}. The message should read "<what>: <why>", e.g.
// "add: shapes [2, 3] and [4, 3] do not broadcast".
[[noreturn]] void raise(ErrorKind kind, const std::string& message);

}  // namespace spar
