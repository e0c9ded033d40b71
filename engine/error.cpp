#include "engine/error.h"

namespace spar {

const char* to_string(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::kBadShape:
      return "bad shape";
    case ErrorKind::kBadArgument:
      return "bad argument";
    case ErrorKind::kBadInputFile:
      return "bad input file";
    case ErrorKind::kBadRecipe:
      return "bad recipe";
    case ErrorKind::kCorruptCheckpoint:
      return "corrupt checkpoint";
    case ErrorKind::kNumericalFailure:
      return "numerical failure";
    case ErrorKind::kIo:
      return "i/o error";
  }
  return "error";
}

void raise(ErrorKind kind, const std::string& message) {
  throw Error(kind, message);
}

}  // namespace spar
