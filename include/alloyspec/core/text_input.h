/** @file text_input.h  Reading whitespace-separated data files with '#' comments. */
#pragma once

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
} // namespace alloyspec
