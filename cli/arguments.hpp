// Command-line parsing outcome mapped onto ringdown's exit codes (CLI.md):
// CLI11 reports problems with its own exit numbers (e.g. 109 for an
// unexpected argument, LIBRARIES.md section 5); here every flag error
// becomes exit 2 with a "ringdown: error:" message and a hint, while
// --help and --version print and exit 0.
#pragma once

namespace CLI {
class App;
}

namespace ringdown::cli {

// The version string printed by --version.
const char* version_text();

// Sets the program-wide options of `app` (version flag, one subcommand
// required, GNU-style --long=value accepted by CLI11 already).
void configure_app(CLI::App& app);

// Parses argv. Returns -1 when a command should run, else the exit code to
// return at once (0 after --help/--version, 2 after an error).
int parse_arguments(CLI::App& app, int argc, char** argv);

}  // namespace ringdown::cli
