/** @file errors.h  Error type for bad user input (exit status 2). */
#pragma once

#include <stdexcept>
#include <string>

namespace alloyspec
{
  /**
   * Thrown for every problem the user can fix: an unknown parameter, a value
   * out of range, an unreadable or malformed file, an output folder that would
   * overwrite an earlier study. The message names the parameter (or file and
   * line) and the allowed values. The command-line driver turns it into exit
   * status 2 without touching anything already written.
   */
  class InputError : public std::runtime_error
  {
  public:
    explicit InputError(const std::string &message)
      : std::runtime_error(message)
    {}
  };
} // namespace alloyspec
