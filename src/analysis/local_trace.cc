/** @file local_trace.cc  Local-trace IDS and DOS from the central cell, weighted like every average. */
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/analysis/local_trace.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/results_store.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  std::vector<LocalTraceRow> local_trace_estimate(const std::vector<RealisationRecord> &records,
                                                  const std::string                    &boundary,
                                                  const std::vector<double>            &energies,
                                                  const double cell_volume, const double eta,
                                                  bool &have_weights)
  {
    constexpr double pi = 3.14159265358979323846;
    std::vector<double> sum(energies.size(), 0.0), sum_sq(energies.size(), 0.0),
      dos_sum(energies.size(), 0.0), dos_sum_sq(energies.size(), 0.0);
    std::size_t count = 0;
    for (const auto &r : records)
      {
        if (r.boundary != boundary || r.central_weights.size() != r.eigenvalues.size())
          continue;
        if (!std::isfinite(r.log_weight))
          throw std::invalid_argument("local_trace_estimate: a record's log weight must be finite");
        // The likelihood ratio: exactly 1 for plain sampling, so the sums stay bit for bit.
        const double w = std::exp(r.log_weight);
        ++count;
        for (std::size_t i = 0; i < energies.size(); ++i)
          {
            double n_local = 0, dos = 0;
            for (std::size_t j = 0; j < r.eigenvalues.size(); ++j)
              if (std::isfinite(r.central_weights[j]))
                {
                  have_weights = true;
                  const double x = energies[i] - r.eigenvalues[j];
                  if (x >= 0)
                    n_local += r.central_weights[j];
                  dos += r.central_weights[j] * eta / (pi * (x * x + eta * eta));
                }
            const double y = (n_local / cell_volume) * w;
            sum[i] += y;
            sum_sq[i] += y * y;
            const double z = (dos / cell_volume) * w;
            dos_sum[i] += z;
            dos_sum_sq[i] += z * z;
          }
      }
    std::vector<LocalTraceRow> rows;
    const double               n = std::max<std::size_t>(count, 1);
    for (std::size_t i = 0; i < energies.size(); ++i)
      {
        LocalTraceRow row{energies[i]};
        row.ids          = sum[i] / n;
        const double var = count > 1 ? std::max(0.0, (sum_sq[i] - n * row.ids * row.ids) / (n - 1)) : 0.0;
        row.standard_error = std::sqrt(var / n);
        row.dos            = dos_sum[i] / n;
        const double dos_var =
          count > 1 ? std::max(0.0, (dos_sum_sq[i] - n * row.dos * row.dos) / (n - 1)) : 0.0;
        row.dos_standard_error = std::sqrt(dos_var / n);
        row.realisations   = count;
        rows.push_back(row);
      }
    return rows;
  }

  void write_local_trace_table(const std::string &output_dir, const AnalysisInput &merged,
                               const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                               const double eta)
  {
    const double cell_volume = std::pow(merged.cell_size, merged.dimension);
    bool         have_weights = false;
    std::vector<std::vector<LocalTraceRow>> local;
    for (const auto &bc : merged.boundaries)
      local.push_back(local_trace_estimate(merged.records, bc, merged.energies, cell_volume, eta,
                                           have_weights));
    if (!have_weights)
      return; // records of an older version without central weights
    std::ostringstream csv;
    csv << "energy";
    for (const auto &bc : merged.boundaries)
      csv << ",ids_local_" << bc << ",stderr_local_" << bc << ",ids_" << bc
          << ",difference_in_stderr_" << bc << ",dos_local_" << bc << ",complete_" << bc;
    csv << '\n';
    const double none = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t i = 0; i < merged.energies.size(); ++i)
      {
        csv << csv_number(merged.energies[i]);
        for (std::size_t b = 0; b < merged.boundaries.size(); ++b)
          {
            const auto  &l        = local[b][i];
            const double combined = std::hypot(l.standard_error, rows[b][i].standard_error);
            const bool   ok       = rows[b][i].complete;
            csv << ',' << csv_number(ok ? l.ids : none) << ','
                << csv_number(ok ? l.standard_error : none) << ','
                << csv_number(ok ? rows[b][i].mean : none) << ','
                << csv_number(!ok ? none : combined > 0 ? (l.ids - rows[b][i].mean) / combined : 0.0)
                << ',' << csv_number(ok ? l.dos : none) << ',' << (ok ? 1 : 0);
          }
        csv << '\n';
      }
    ResultsStore::write_file_in(output_dir, "local_trace.csv", with_energy_columns(csv.str(), merged));
  }
} // namespace alloyspec
