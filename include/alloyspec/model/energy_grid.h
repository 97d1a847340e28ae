/** @file energy_grid.h  The energy grid of a study, written as a range in words or as a list. */
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

namespace alloyspec
{
  /** Largest number of points an energy grid may have. */
  constexpr std::size_t max_energy_grid_points = 1000000;

  /**
   * Parses an energy grid. Two forms are accepted:
   * - a range in words, "a to b by h" (h > 0, b ≥ a): the points
   *   @f$a + i h@f$ for @f$i = 0, 1, \dots@f$ with @f$a + i h \le b + 10^{-9} h@f$,
   *   so a stop that lies on the grid up to rounding is included (and then
   *   reported exactly as written);
   * - an ascending comma-separated list "0, 0.5, 2" (a single number is a
   *   list of one).
   *
   * Throws InputError naming @p parameter_name on anything else, on a grid with
   * more than max_energy_grid_points points, and on the colon form
   * "a:h:b" of earlier versions, whose message shows the same grid in words.
   */
  std::vector<double> parse_energy_grid(const std::string &text,
                                        const std::string &parameter_name = "study/energies");

  /**
   * The words form "a to b by h" of a grid written in the colon form "a:h:b"
   * of earlier versions, with the numbers exactly as written; empty when
   * @p text is not three colon-separated fields. Used to explain the new form
   * in error messages and to read parameter files stored by earlier versions
   * in their output folders.
   */
  std::optional<std::string> energy_grid_in_words(const std::string &colon_form);
} // namespace alloyspec
