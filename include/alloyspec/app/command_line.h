/** @file command_line.h  The `alloyspec` command: subcommands and their options. */
#pragma once

#include <string>

namespace alloyspec
{
  /**
   * The embedded default scenario, run by `alloyspec run` without a parameter
   * file (an invented binary alloy; see the text for its parameters).
   */
  extern const char *const default_scenario;

  /**
   * Runs the command line. Returns the exit status: 0 on success, 2 for bad
   * input (a message naming the parameter or file and the allowed values is
   * printed; nothing already written is touched), 1 for a failure of the
   * computation itself, 128 + signal (130 for SIGINT, 143 for SIGTERM) when
   * `run` was stopped by that signal after storing the realisation it was
   * solving (continue with `--resume`; a second signal ends the process at
   * once). An error on any MPI rank ends every rank with the same status.
   * MPI (and PETSc/SLEPc) must be initialised.
   */
  int run_command_line(int argc, char **argv);
} // namespace alloyspec
