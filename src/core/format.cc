#include <alloyspec/core/format.h>

#include <cmath>
#include <cstdio>

namespace alloyspec
{
  std::string csv_number(const double x)
  {
    if (!std::isfinite(x))
      return missing_marker;
    char buffer[40];
    std::snprintf(buffer, sizeof buffer, "%.17g", x);
    return buffer;
  }

  std::string csv_number(const std::optional<double> &x)
  {
    return x ? csv_number(*x) : std::string(missing_marker);
  }

  std::string short_number(const double x, const int digits)
  {
    // People read "inf" in a message about a value they typed; only NaN is missing.
    if (std::isnan(x))
      return missing_marker;
    if (std::isinf(x))
      return x > 0 ? "inf" : "-inf";
    char buffer[40];
    std::snprintf(buffer, sizeof buffer, "%.*g", digits, x);
    return buffer;
  }

  std::string readable_seconds(const double seconds)
  {
    char buffer[48];
    if (!std::isfinite(seconds) || seconds < 0)
      return missing_marker;
    if (seconds < 10)
      std::snprintf(buffer, sizeof buffer, "%.2f s", seconds);
    else if (seconds < 60)
      std::snprintf(buffer, sizeof buffer, "%.1f s", seconds);
    else if (seconds < 3600)
      {
        const long s = std::lround(seconds);
        std::snprintf(buffer, sizeof buffer, "%ld min %02ld s", s / 60, s % 60);
      }
    else
      {
        const long s = std::lround(seconds);
        std::snprintf(buffer, sizeof buffer, "%ld h %02ld min", s / 3600, (s % 3600) / 60);
      }
    return buffer;
  }
} // namespace alloyspec
