// See fmt.hpp.
#include "cli/fmt.hpp"

#include <sys/stat.h>

#include <CLI/CLI.hpp>
#include <cerrno>
#include <cstdlib>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <iterator>
#include <optional>
#include <sstream>
#include <string>

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"
#include "cli/exit_codes.hpp"
#include "parser/load.hpp"

namespace ringdown::cli {

namespace {

std::optional<std::string> read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return std::nullopt;
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) return std::nullopt;
  return text.str();
}

}  // namespace

CLI::App* setup_fmt(CLI::App& app, FmtOptions& options) {
  CLI::App* cmd = app.add_subcommand("fmt", "Rewrite circuit files in the canonical layout");
  cmd->add_option("FILE", options.files, "circuit files (.rlc)")->required();
  cmd->add_flag("--check", options.check, "write nothing; exit 1 and list the files that would change");
  return cmd;
}

int run_fmt(const FmtOptions& options) {
  bool bad = false;
  bool differs = false;
  for (const std::string& path : options.files) {
    const std::optional<std::string> text = read_file(path);
    if (!text) {
      print_error("cannot read '" + path + "': " + std::strerror(errno));
      bad = true;
      continue;
    }
    Diagnostics diagnostics;
    const std::optional<std::string> formatted = format_text(*text, path, diagnostics);
    if (!formatted) {
      print_diagnostics(diagnostics);
      bad = true;
      continue;
    }
    if (*formatted == *text) continue;
    differs = true;
    if (options.check) {
      std::printf("%s\n", path.c_str());
      continue;
    }
    // Rewrite the file a symbolic link points at, not the link itself, and
    // keep the file's permissions.
    std::string target = path;
    if (char* real = ::realpath(path.c_str(), nullptr)) {
      target = real;
      std::free(real);
    }
    struct stat info {};
    const int mode = ::stat(target.c_str(), &info) == 0 ? static_cast<int>(info.st_mode & 07777) : -1;
    AtomicFile out(target, mode);
    if (!out.ok()) {
      print_error(out.error());
      bad = true;
      continue;
    }
    if (std::fwrite(formatted->data(), 1, formatted->size(), out.stream()) != formatted->size() ||
        !out.commit()) {
      print_error(out.error().empty() ? "cannot write '" + path + "'" : out.error());
      bad = true;
      continue;
    }
    std::printf("formatted %s\n", path.c_str());
  }
  std::fflush(stdout);
  if (bad) return kExitBadInput;
  if (differs && options.check) return kExitDiffers;
  return kExitOk;
}

}  // namespace ringdown::cli
