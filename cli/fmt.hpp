// `ringdown fmt FILE... [--check]`: rewrites circuit files in the canonical
// layout of parser's format_text (comments kept, idempotent). Each rewrite
// goes through an AtomicFile and keeps the file's permissions. With --check
// nothing is written: the files that would change are listed on stdout and
// the exit status is 1. A file that does not parse is reported and left
// alone (exit 2, which wins over 1).
#pragma once

#include <string>
#include <vector>

namespace CLI {
class App;
}

namespace ringdown::cli {

struct FmtOptions {
  std::vector<std::string> files;
  bool check = false;  // --check: list files that would change, write nothing
};

CLI::App* setup_fmt(CLI::App& app, FmtOptions& options);
int run_fmt(const FmtOptions& options);

}  // namespace ringdown::cli
