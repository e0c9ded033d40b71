#include "cli/arguments.h"

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cctype>
#include <climits>
#include <iostream>
#include <vector>

#include "recipes/recipe.h"

namespace spar {
namespace cli {
namespace {

std::string join(const std::vector<std::string>& parts, const std::string& between) {
  std::string out;
  for (const std::string& p : parts) out += (out.empty() ? "" : between) + p;
  return out;
}

// An option's help up to its first parenthesis, starting in lower case: "run folder to create".
std::string short_description(const CLI::Option& option) {
  std::string d = option.get_description();
  d = d.substr(0, std::min(d.find(" ("), d.find('\n')));
  if (!d.empty()) d[0] = static_cast<char>(std::tolower(static_cast<unsigned char>(d[0])));
  return d;
}

// "-x", "--thing" or "--thing=value"; not "-5", which is a (misplaced) number.
bool looks_like_option(const std::string& arg) {
  return arg.size() > 1 && arg[0] == '-' && !std::isdigit(static_cast<unsigned char>(arg[1])) &&
         arg[1] != '.';
}

// Every name of the options of `command` as one types it: "--threads", "-n".
std::vector<std::string> option_names(CLI::App& command) {
  std::vector<std::string> names;
  for (const CLI::Option* o : command.get_options()) {
    for (const std::string& n : o->get_lnames()) names.push_back("--" + n);
    for (const std::string& n : o->get_snames()) names.push_back("-" + n);
  }
  return names;
}

std::vector<std::string> command_names(CLI::App& root) {
  std::vector<std::string> names;
  for (const CLI::App* c : root.get_subcommands([](CLI::App*) { return true; }))
    names.push_back(c->get_name());
  return names;
}

// The candidate nearest to `typed` (dashes aside) when it is near enough to be a typo of it;
// "" when none is. A beginning of two letters or more counts as near ("--thr": "--threads").
std::string nearest(const std::string& typed, const std::vector<std::string>& candidates) {
  const auto bare = [](const std::string& s) {
    return s.substr(std::min(s.find_first_not_of('-'), s.size()));
  };
  const std::string t = bare(typed);
  std::string best;
  int best_distance = INT_MAX;
  for (const std::string& c : candidates) {
    const std::string b = bare(c);
    int d = edit_distance(t, b);
    if (t.size() >= 2 && b.compare(0, t.size(), t) == 0) d = std::min(d, 1);
    if (d < best_distance) best_distance = d, best = c;
  }
  const int size = static_cast<int>(t.size());
  return best_distance <= std::max(2, size / 3) && best_distance < size ? best : "";
}

std::string unknown_option(CLI::App& command, const std::string& who, const std::string& arg) {
  const std::string name = arg.substr(0, arg.find('='));
  const std::string near = nearest(name, option_names(command));
  return who + ": " + name + ": no such option" +
         (near.empty() ? "; see '" + who + " --help'" : "; did you mean '" + near + "'?");
}

std::string unknown_command(CLI::App& root, const std::string& arg) {
  const std::vector<std::string> names = command_names(root);
  const std::string near = nearest(arg, names);
  return "spar: " + arg + ": no such command" +
         (near.empty() ? "; the commands are " + join(names, ", ")
                       : "; did you mean '" + near + "'?");
}

std::string unexpected_argument(CLI::App& command, const std::string& who, const std::string& arg) {
  std::vector<std::string> positionals;
  for (const CLI::Option* o : command.get_options())
    if (o->get_positional()) positionals.push_back(o->get_name());
  const std::string takes = positionals.empty() ? "only options"
                            : positionals.size() == 1
                                ? "one argument (" + positionals.front() + ") and options"
                                : std::to_string(positionals.size()) + " arguments (" +
                                      join(positionals, ", ") + ") and options";
  return who + ": " + arg + ": unexpected argument; " + command.get_name() + " takes " + takes;
}

// The option of `command` that a parser message is about: the one named earliest in it (the
// longest name where two start at the same place); else one whose bare long name ("force")
// opens the message.
CLI::Option* option_named_in(CLI::App& command, const std::string& text) {
  CLI::Option* found = nullptr;
  size_t at = std::string::npos, length = 0;
  for (CLI::Option* o : command.get_options()) {
    const std::string name = o->get_name();
    const size_t p = name.empty() ? std::string::npos : text.find(name);
    if (p == std::string::npos) continue;
    if (p < at || (p == at && name.size() > length)) found = o, at = p, length = name.size();
  }
  if (found == nullptr)
    for (CLI::Option* o : command.get_options())
      for (const std::string& n : o->get_lnames())
        if (text.compare(0, n.size() + 1, n + " ") == 0) return o;
  return found;
}

// An option that took the next option as its value ("--out --quiet": the parser gives --out
// the value "--quiet"); nullptr if none did.
const CLI::Option* option_missing_its_value(CLI::App& command) {
  for (const CLI::Option* o : command.get_options()) {
    if (o->get_positional() || o->get_expected_max() == 0) continue;
    for (const std::string& value : o->results())
      if (looks_like_option(value)) return o;
  }
  return nullptr;
}

}  // namespace

// The one line that says what is wrong with the command line, or "" if nothing is. `parser` is
// the failure CLI11 reported, or nullptr when one of our own checks failed with the line `ours`
// (or the parse went through). Names nothing knows come first, since they explain most other
// complaints (`--thread 1` leaves a stray 1), then options that took the next option as their
// value (`--out --steps 5` leaves a stray 5).
std::string argument_problem(CLI::App& root, const CLI::ParseError* parser,
                             const std::string& ours) {
  // Before any command, the first word is the command ("spar trian ring8 --out r").
  const std::vector<std::string> stray = root.remaining();
  if (!stray.empty())
    return looks_like_option(stray.front()) ? unknown_option(root, "spar", stray.front())
                                            : unknown_command(root, stray.front());
  const std::vector<CLI::App*> parsed = root.get_subcommands();
  if (parsed.empty())
    return "spar: no command given; the commands are " + join(command_names(root), ", ") +
           " ('spar --help' says more)";
  CLI::App& command = *parsed.front();
  const std::string who = "spar " + command.get_name();
  const std::vector<std::string> rest = command.remaining();
  for (const std::string& arg : rest)
    if (looks_like_option(arg)) return unknown_option(command, who, arg);
  if (const CLI::Option* o = option_missing_its_value(command))
    return who + ": " + o->get_name() + " needs a value (" + short_description(*o) + ")";
  if (!rest.empty()) return unexpected_argument(command, who, rest.front());
  if (parser == nullptr) return ours;

  if (dynamic_cast<const CLI::RequiredError*>(parser)) {
    for (const CLI::Option* o : command.get_options())
      if (o->get_required() && o->count() == 0)
        return who + ": " + o->get_name() + " is missing (" + short_description(*o) + ")";
  }
  if (dynamic_cast<const CLI::ExcludesError*>(parser)) {
    for (const CLI::Option* o : command.get_options())
      for (const CLI::Option* other : o->get_excludes())
        if (o->count() > 0 && other->count() > 0)
          return who + ": " + o->get_name() + " and " + other->get_name() +
                 " do not go together; use one or the other";
  }
  const CLI::Option* option = option_named_in(command, parser->what());
  if (option == nullptr)
    return who + ": cannot make sense of these arguments; see '" + who + " --help'";
  const std::string name = option->get_name();
  if (dynamic_cast<const CLI::ArgumentMismatch*>(parser)) {
    if (option->get_expected_max() == 0) return who + ": " + name + " takes no value";
    if (option->count() > 1) return who + ": " + name + " is given more than once; give it once";
    return who + ": " + name + " needs a value (" + short_description(*option) + ")";
  }
  const std::string value = join(option->results(), " ");
  return who + ": " + name + ": '" + value + "' is not a value it takes; see '" + who + " --help'";
}

// Prints the help that was asked for despite a bad argument beside it (exit 0), or the problem
// (exit 2).
int refuse_arguments(CLI::App& root, const std::string& problem) {
  bool help = root.get_help_ptr() != nullptr && root.get_help_ptr()->count() > 0;
  for (const CLI::App* c : root.get_subcommands())
    help = help || (c->get_help_ptr() != nullptr && c->get_help_ptr()->count() > 0);
  if (help) {
    std::cout << root.help();
    return 0;
  }
  std::cerr << problem << '\n';
  return 2;
}

}  // namespace cli
}  // namespace spar
