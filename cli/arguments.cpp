// See arguments.hpp.
#include "cli/arguments.hpp"

#include <CLI/CLI.hpp>
#include <string>

#include "cli/console.hpp"
#include "cli/exit_codes.hpp"

#ifndef RINGDOWN_VERSION
#define RINGDOWN_VERSION "unknown"
#endif

namespace ringdown::cli {

const char* version_text() { return "ringdown " RINGDOWN_VERSION; }

void configure_app(CLI::App& app) {
  app.set_version_flag("--version", version_text(), "print the version and exit");
  app.require_subcommand(1);
  app.footer("Exit status: 0 success, 1 fmt --check found changes, 2 bad input "
             "(file, flag, netlist), 3 numerical failure.");
}

int parse_arguments(CLI::App& app, int argc, char** argv) {
  try {
    app.parse(argc, argv);
    return -1;
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);  // prints the help to stdout, returns 0
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    // Name the subcommand whose flags were wrong, so the hint is precise.
    std::string command = "ringdown";
    for (const CLI::App* sub : app.get_subcommands()) command += " " + sub->get_name();
    print_error(e.what(), "'" + command + " --help' lists the " +
                              (command == "ringdown" ? "commands" : "options"));
    return kExitBadInput;
  }
}

}  // namespace ringdown::cli
