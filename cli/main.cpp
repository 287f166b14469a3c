// ringdown's entry point: only wiring. Each command lives in its own file
// (an options struct, setup_* binding its flags, run_* doing the work;
// STYLE.md "CLI"); main registers them, parses, and dispatches.
#include <CLI/CLI.hpp>
#include <exception>
#include <new>

#include "cli/arguments.hpp"
#include "cli/atomic_file.hpp"
#include "cli/compare.hpp"
#include "cli/console.hpp"
#include "cli/demo.hpp"
#include "cli/distribute.hpp"
#include "cli/exit_codes.hpp"
#include "cli/fmt.hpp"
#include "cli/freq.hpp"
#include "cli/inspect.hpp"
#include "cli/modes.hpp"
#include "cli/run.hpp"

namespace {

int run_command_line(int argc, char** argv) {
  using namespace ringdown::cli;

  CLI::App app{"ringdown: exact transient simulation of linear RLC circuits", "ringdown"};
  configure_app(app);
  RunOptions run;
  CheckOptions check;
  CompareOptions compare;
  InspectOptions inspect;
  ModesOptions modes;
  FmtOptions fmt;
  FreqOptions freq;
  DemoOptions demo;
  CLI::App* run_command = setup_run(app, run);
  CLI::App* check_command = setup_check(app, check);
  CLI::App* compare_command = setup_compare(app, compare);
  CLI::App* inspect_command = setup_inspect(app, inspect);
  CLI::App* modes_command = setup_modes(app, modes);
  CLI::App* fmt_command = setup_fmt(app, fmt);
  CLI::App* freq_command = setup_freq(app, freq);
  CLI::App* demo_command = demo_available() ? setup_demo(app, demo) : nullptr;

  if (const int code = parse_arguments(app, argc, argv); code >= 0) return code;
  // Under mpirun (cli/distribute.hpp) every rank runs `run` and `check`, whose sweeps and
  // trials are shared out; only rank 0 writes the JSON and JUnit files. The other commands
  // run on rank 0 alone.
  if (!is_root()) {
    if (!*run_command && !*check_command) return kExitOk;
    run.json.clear();
    check.run.json.clear();
    check.junit.clear();
  }
  try {
    if (*run_command) return run_run(run);
    if (*check_command) return run_check(check);
    if (*compare_command) return run_compare(compare);
    if (*inspect_command) return run_inspect(inspect);
    if (*modes_command) return run_modes(modes);
    if (*fmt_command) return run_fmt(fmt);
    if (*freq_command) return run_freq(freq);
    if (demo_command && *demo_command) return run_demo(demo);
  } catch (const std::bad_alloc&) {
    print_error("out of memory", "a smaller --until or a larger --every needs less");
    return kExitNumerical;
  } catch (const std::exception& e) {
    // Not expected: every stage reports problems as diagnostics. Say so
    // plainly instead of letting the runtime abort with a core dump.
    print_error(std::string("internal error: ") + e.what(), "please report this with the input file");
    return kExitNumerical;
  }
  return kExitBadInput;
}

}  // namespace

int main(int argc, char** argv) {
  ringdown::cli::install_cleanup_handlers();
  ringdown::cli::DistributedSession session(argc, argv);
  return session.finish(run_command_line(argc, argv));
}
