// Exit status of every ringdown command (CLI.md, "Exit status"), in one place
// so that no command invents its own numbers.
#pragma once

namespace ringdown::cli {

enum ExitCode : int {
  kExitOk = 0,         // success
  kExitDiffers = 1,    // fmt --check: a file would change (check: an expect failed)
  kExitBadInput = 2,   // missing file, bad flag, netlist error, --strict warning
  kExitNumerical = 3,  // a numerical failure the tool could not recover from
};

}  // namespace ringdown::cli
