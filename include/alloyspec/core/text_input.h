/** @file text_input.h  Reading data files with '#' comments, and optional numbers in parameters. */
#pragma once

#include <alloyspec/core/errors.h>

#include <cmath>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

namespace alloyspec
{
  /** The whitespace-separated fields of @p line, ignoring everything from '#' on. */
  inline std::vector<std::string> tokens_of_line(std::string line)
  {
    const std::size_t hash = line.find('#');
    if (hash != std::string::npos)
      line.erase(hash);
    std::istringstream       fields(line);
    std::vector<std::string> tokens;
    for (std::string t; fields >> t;)
      tokens.push_back(t);
    return tokens;
  }

  /**
   * An optional number entry: empty (or blank) @p text gives no value; else
   * the whole text must be one finite number in [@p minimum, @p maximum], or
   * InputError names @p parameter and the allowed range (@p allowed, in words).
   */
  inline std::optional<double> optional_number(const std::string &text, const std::string &parameter,
                                               const double minimum, const double maximum,
                                               const std::string &allowed)
  {
    if (text.find_first_not_of(" \t") == std::string::npos)
      return std::nullopt;
    std::size_t used  = 0;
    double      value = 0;
    try
      {
        value = std::stod(text, &used);
      }
    catch (const std::exception &)
      {
        used = 0;
      }
    if (used == 0 || text.find_first_not_of(" \t", used) != std::string::npos ||
        !std::isfinite(value) || !(value >= minimum && value <= maximum))
      throw InputError("parameter '" + parameter + "': '" + text + "' is not allowed (" + allowed +
                       ")");
    return value;
  }
} // namespace alloyspec
