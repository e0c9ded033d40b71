// `spar export`: a trained generator as one dependency-free C99 header (export/c_header.h).
#include <CLI/CLI.hpp>
#include <filesystem>
#include <iostream>

#include "cli/commands.h"
#include "engine/atomic_file.h"
#include "engine/error.h"
#include "export/c_header.h"

namespace spar {
namespace cli {
namespace {

namespace fs = std::filesystem;

struct ExportOptions {
  std::string source, header;
  CHeaderOptions c;
};

int run_export(const ExportOptions& o) {
  // Every check before anything is written: the destination, the prefix, the generator.
  std::error_code ec;
  const fs::path out(o.header);
  if (o.header.empty() || o.header.back() == '/' || fs::is_directory(out, ec))
    raise(ErrorKind::kBadArgument,
          o.header + ": names a folder; --c-header needs a file such as gen.h");
  const fs::path folder = out.parent_path().empty() ? fs::path(".") : out.parent_path();
  if (!fs::is_directory(folder, ec))
    raise(ErrorKind::kBadArgument,
          o.header + ": the folder " + folder.string() + " does not exist");
  SavedGenerator g = load_generator(o.source);
  CHeaderOptions c = o.c;
  c.file_name = out.filename().string();
  const std::string text = c_header(g, c);
  write_file_atomically(o.header, text.data(), text.size());
  std::cout << "wrote " << o.header << " (" << text.size() << " bytes): " << o.c.prefix
            << "_latent and " << o.c.prefix << "_generate for the generator of step " << g.step
            << "\n";
  return 0;
}

}  // namespace

Subcommand add_export(CLI::App& parent) {
  auto o = std::make_shared<ExportOptions>();
  CLI::App* app = parent.add_subcommand(
      "export",
      "Write a run's weight-averaged generator as one dependency-free C99 header: its weights,\n"
      "its forward pass and spar's latent draw, for any run (points, tables, images).\n"
      "Example: spar export trained/ring8 --c-header ring8.h --prefix ring8");
  app->add_option("source", o->source, "Run folder or generator.spar file")->required();
  app->add_option("--c-header", o->header, "The header to write (.h)")->required();
  app->add_option("--prefix", o->c.prefix,
                  "Prefix of the header's names, a C identifier (default gen: gen_generate, "
                  "GEN_SCRATCH_BYTES)");
  return {app, [o] { return run_export(*o); }};
}

}  // namespace cli
}  // namespace spar
