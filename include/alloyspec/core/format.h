/** @file format.h  How numbers and missing values are written in every table. */
#pragma once

#include <optional>
#include <string>

namespace alloyspec
{
  /**
   * The one marker for a missing value in a CSV table: `nan`. numpy
   * (`loadtxt`, `genfromtxt`), pandas and gnuplot all read it as not-a-number,
   * and it can never be mistaken for a measured value. JSON files write a
   * missing value as `null` (see io/manifest.h).
   */
  inline constexpr const char *missing_marker = "nan";

  /**
   * A double at full precision (17 significant digits, so it reads back to the
   * same bits); missing_marker for NaN and ±infinity.
   */
  std::string csv_number(double x);
  /** csv_number(*x), or missing_marker when @p x is empty. */
  std::string csv_number(const std::optional<double> &x);

  /**
   * A number for people (console, messages, labels): @p digits significant
   * digits; `inf`/`-inf` for infinities, missing_marker for NaN.
   */
  std::string short_number(double x, int digits = 4);

  /** Seconds for people: "0.42 s", "12.3 s", "4 min 05 s", "2 h 07 min". */
  std::string readable_seconds(double seconds);
} // namespace alloyspec
