/** @file interrupt.h  Stopping a long run cleanly on SIGINT or SIGTERM. */
#pragma once

#include <stdexcept>
#include <string>

namespace alloyspec
{
  /**
   * While alive, SIGINT and SIGTERM do not kill the process: the first one
   * only records its number, so that the running realisation can be finished
   * and stored before the study stops (see Study::solve()). A second signal
   * restores the previous disposition and raises the signal again, so that an
   * impatient user can still end the process at once (the store stays
   * readable: a torn last record is ignored when the study is resumed). The
   * previous handlers are restored on destruction. Guards nest: an inner one
   * changes nothing, and only the outermost restores the handlers.
   */
  class InterruptGuard
  {
  public:
    InterruptGuard();
    ~InterruptGuard();
    InterruptGuard(const InterruptGuard &)            = delete;
    InterruptGuard &operator=(const InterruptGuard &) = delete;

    /**
     * Keeps the guards' handlers installed after the last guard is destroyed,
     * for the teardown of a command that has finished its work (MPI and the
     * solver libraries can take a noticeable time to shut down): a first
     * signal there is only recorded and the command's status stands, while a
     * second one still ends the process at once. No effect without a guard.
     */
    static void hold_until_exit();
    /** The first signal received while a guard was alive, 0 if none. */
    static int received();
    /** Forgets a received signal (tests). */
    static void reset();
  };

  /**
   * Thrown after a run stopped on request (all finished realisations are
   * stored). The command line prints what() and exits with status
   * 128 + signal() (130 for SIGINT, 143 for SIGTERM, the shell convention).
   */
  class Interrupted : public std::runtime_error
  {
  public:
    Interrupted(int signal, const std::string &message)
      : std::runtime_error(message)
      , signal_(signal)
    {}
    int signal() const { return signal_; }

  private:
    int signal_;
  };

  /** "SIGINT", "SIGTERM" or "signal N". */
  std::string signal_name(int signal);
} // namespace alloyspec
