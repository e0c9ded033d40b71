// Messages of our own about the command line. CLI11 only parses; when it fails, or when the
// parse went through but left something odd, argument_problem() looks at what was parsed and
// says in one line what is wrong, suggesting the nearest command or option for a typo.
#pragma once

#include <string>

namespace CLI {
class App;
class ParseError;
}  // namespace CLI

namespace spar {
namespace cli {

// The one line that says what is wrong with the command line, or "" if nothing is. `parser` is
// the failure CLI11 reported, or nullptr when one of our own checks failed with the line `ours`
// (or the parse went through).
std::string argument_problem(CLI::App& root, const CLI::ParseError* parser,
                             const std::string& ours);
// Prints the help that was asked for despite a bad argument beside it (returns 0), or the
// problem on stderr (returns 2).
int refuse_arguments(CLI::App& root, const std::string& problem);

}  // namespace cli
}  // namespace spar
