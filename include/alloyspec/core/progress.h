/** @file progress.h  Progress line on a terminal, silence in logs. */
#pragma once

#include <chrono>
#include <cstddef>
#include <string>

namespace alloyspec
{
  /**
   * Prints "label: done/total, T elapsed, rate, about T left, phase" on one rewritten line of
   * standard error when that is a terminal; prints nothing otherwise, so that
   * log files stay clean.
   */
  class Progress
  {
  public:
    Progress(std::string label, std::size_t total, bool enabled);
    /** Reports that @p done items (in total) are finished. */
    void update(std::size_t done);
    /**
     * Names what is being done now ("solving realisation 0, dirichlet"), shown
     * with the elapsed time, so that the line says something before the first
     * item is finished.
     */
    void phase(const std::string &what);
    /** Ends the line. */
    void finish();

    /** True when standard error is a terminal. */
    static bool stderr_is_terminal();
    /** "1 h 02 min", "3 min 05 s", "12 s". */
    static std::string format_duration(double seconds);

  private:
    std::string                           label_;
    std::size_t                           total_;
    bool                                  enabled_;
    bool                                  printed_ = false;
    std::size_t                           done_    = 0;
    std::string                           phase_;

    void print();
    std::chrono::steady_clock::time_point start_;
  };
} // namespace alloyspec
