/** @file energy_grid.cc  Energy grids: "a to b by h" or an ascending list. */
#include <alloyspec/core/errors.h>
#include <alloyspec/model/energy_grid.h>

#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    std::string trim(const std::string &text)
    {
      const auto first = text.find_first_not_of(" \t\r\n");
      if (first == std::string::npos)
        return {};
      const auto last = text.find_last_not_of(" \t\r\n");
      return text.substr(first, last - first + 1);
    }

    std::vector<std::string> split(const std::string &text, const char separator)
    {
      std::vector<std::string> parts;
      std::size_t              start = 0;
      for (;;)
        {
          const auto end = text.find(separator, start);
          parts.push_back(trim(text.substr(start, end - start)));
          if (end == std::string::npos)
            return parts;
          start = end + 1;
        }
    }

    std::vector<std::string> words_of(const std::string &text)
    {
      std::istringstream       in(text);
      std::vector<std::string> words;
      for (std::string word; in >> word;)
        words.push_back(word);
      return words;
    }

    [[noreturn]] void grid_error(const std::string &parameter_name, const std::string &text,
                                 const std::string &reason)
    {
      throw InputError(parameter_name + ": cannot use '" + text + "' as an energy grid (" +
                       reason +
                       "). Allowed forms: 'start to stop by step' with step > 0 and "
                       "stop >= start (e.g. '0 to 20 by 0.5'), or an ascending "
                       "comma-separated list of numbers (e.g. '0, 0.5, 2'); at most " +
                       std::to_string(max_energy_grid_points) + " points.");
    }

    /** A finite decimal number occupying the whole of @p word. */
    double parse_number(const std::string &word, const std::string &parameter_name,
                        const std::string &text)
    {
      if (word.empty())
        grid_error(parameter_name, text, "empty entry");
      const char *begin = word.c_str();
      char       *end   = nullptr;
      errno             = 0;
      const double value = std::strtod(begin, &end);
      if (end != begin + word.size() || errno == ERANGE || !std::isfinite(value))
        grid_error(parameter_name, text, "'" + word + "' is not a finite number");
      return value;
    }

    std::vector<double> range(const double start, const double stop, const double step,
                              const std::string &parameter_name, const std::string &text)
    {
      if (!(step > 0.0))
        grid_error(parameter_name, text, "the step must be positive");
      if (stop < start)
        grid_error(parameter_name, text, "the stop is below the start");
      // Points a + i h with a + i h ≤ b + 1e-9 h: the tolerance keeps the end
      // point that decimal steps such as 0.1 miss by a rounding error.
      const double steps = std::floor((stop - start) / step + 1e-9);
      if (!(steps < double(max_energy_grid_points)))
        grid_error(parameter_name, text, "too many points");
      const std::size_t   n = static_cast<std::size_t>(steps) + 1;
      std::vector<double> grid;
      grid.reserve(n);
      for (std::size_t i = 0; i < n; ++i)
        grid.push_back(start + double(i) * step);
      // Report the end point as written rather than with the rounding error.
      if (std::abs(grid.back() - stop) <= 1e-9 * step)
        grid.back() = stop;
      return grid;
    }
  } // namespace

  std::optional<std::string> energy_grid_in_words(const std::string &colon_form)
  {
    const auto parts = split(trim(colon_form), ':');
    if (parts.size() != 3)
      return std::nullopt;
    for (const auto &part : parts)
      if (part.empty() || part.find_first_of(" \t,") != std::string::npos)
        return std::nullopt;
    return parts[0] + " to " + parts[2] + " by " + parts[1];
  }

  std::vector<double> parse_energy_grid(const std::string &text, const std::string &parameter_name)
  {
    const std::string body = trim(text);
    if (body.empty())
      grid_error(parameter_name, text, "empty");

    if (body.find(':') != std::string::npos)
      {
        const auto words = energy_grid_in_words(body);
        throw InputError(parameter_name + ": '" + body +
                         "' is in the colon form 'start:step:stop' of earlier versions, which "
                         "is no longer read. Write a range as 'start to stop by step'" +
                         (words ? " (here '" + *words + "')" : std::string()) +
                         ", or an ascending comma-separated list of numbers (e.g. '0, 0.5, 2').");
      }

    const auto words = words_of(body);
    if (words.size() > 1 && body.find(',') == std::string::npos)
      {
        if (words.size() != 5 || words[1] != "to" || words[3] != "by")
          grid_error(parameter_name, text, "a range is written 'start to stop by step'");
        const double start = parse_number(words[0], parameter_name, text);
        const double stop  = parse_number(words[2], parameter_name, text);
        const double step  = parse_number(words[4], parameter_name, text);
        return range(start, stop, step, parameter_name, text);
      }

    const auto parts = split(body, ',');
    if (parts.size() > max_energy_grid_points)
      grid_error(parameter_name, text, "too many points");
    std::vector<double> grid;
    for (const auto &word : parts)
      {
        const double value = parse_number(word, parameter_name, text);
        if (!grid.empty() && !(value > grid.back()))
          grid_error(parameter_name, text, "the list must be strictly ascending");
        grid.push_back(value);
      }
    return grid;
  }
} // namespace alloyspec
