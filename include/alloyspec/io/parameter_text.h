/** @file parameter_text.h  Reading the parameter text stored in an output folder. */
#pragma once

#include <map>
#include <string>

namespace alloyspec
{
  /**
   * "section/entry" → value from a parameter text in deal.II's short format
   * (`subsection`, `set name = value`, `end`; `#` starts a comment). Used to
   * compare a stored study's parameters with a resumed run's, and to show
   * what differs from the defaults, without declaring every entry first.
   */
  std::map<std::string, std::string> flatten_parameters(const std::string &short_prm_text);
} // namespace alloyspec
