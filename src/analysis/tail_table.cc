/** @file tail_table.cc  tail.csv. */
#include <alloyspec/analysis/tail_table.h>
#include <alloyspec/core/format.h>
#include <alloyspec/model/single_site_laws.h>

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  std::string format_tail_table(const std::vector<std::string>                      &boundaries,
                                const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                                const double confidence_level)
  {
    if (rows.size() != boundaries.size())
      throw std::invalid_argument("format_tail_table: one row set per boundary condition");
    const double z = standard_normal_quantile(0.5 * (1.0 + confidence_level));
    std::ostringstream out;
    out << "energy";
    for (const auto &bc : boundaries)
      out << ",ids_" << bc << ",lower_" << bc << ",upper_" << bc << ",ess_" << bc;
    for (const auto &bc : boundaries)
      out << ",log_ids_" << bc;
    out << '\n';
    const std::size_t n = rows.empty() ? 0 : rows.front().size();
    for (std::size_t i = 0; i < n; ++i)
      {
        out << csv_number(rows.front()[i].energy);
        for (const auto &r : rows)
          {
            const auto &row = r[i];
            // Above some realisation's verified range the mean is an
            // under-count: written as missing, like ids.csv, never as a value.
            const double nan = std::nan("");
            out << ',' << csv_number(row.complete ? row.mean : nan) << ','
                << csv_number(row.complete ? std::max(0.0, row.mean - z * row.standard_error) : nan)
                << ',' << csv_number(row.complete ? row.mean + z * row.standard_error : nan) << ','
                << csv_number(row.complete ? row.effective_sample_size : nan);
          }
        for (const auto &r : rows)
          out << ','
              << csv_number(r[i].complete && r[i].mean > 0 ? std::log(r[i].mean) : std::nan(""));
        out << '\n';
      }
    return out.str();
  }
} // namespace alloyspec
