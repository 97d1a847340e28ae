/** @file collective_errors.h  Errors that end every MPI rank, not just the one that failed. */
#pragma once

#include <alloyspec/core/errors.h>

#include <mpi.h>

#include <exception>
#include <string>
#include <utility>

namespace alloyspec
{
  /**
   * Collective: when any rank reports an error, every rank throws it, so that
   * no rank is left waiting in a later collective call (a hang) and the
   * message reaches rank 0, which prints it. @p error empty means no error;
   * @p input_error selects InputError (exit status 2) over a computation failure.
   * On more than one rank the message names the failing rank, "(MPI rank p)"
   * with p its rank in MPI_COMM_WORLD, once: a message collected over a team
   * and then over all ranks keeps the name it got first.
   */
  void throw_if_any_failed(MPI_Comm comm, const std::string &error, bool input_error);

  /** Runs @p job, turning an exception into (message, is input error); ("", false) if none. */
  template <typename Job>
  std::pair<std::string, bool> capture_error(Job &&job)
  {
    try
      {
        job();
      }
    catch (const InputError &e)
      {
        return {e.what(), true};
      }
    catch (const std::exception &e)
      {
        return {e.what(), false};
      }
    return {std::string(), false};
  }
} // namespace alloyspec
