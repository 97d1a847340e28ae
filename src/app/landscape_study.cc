/**
 * @file landscape_study.cc  `alloyspec landscape`: the landscape estimate for
 * every realisation of a study, compared with stored eigenvalues.
 */
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/app/landscape_study.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/app/study.h>

#include <deal.II/base/mpi.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    std::string number(const double x)
    {
      if (!std::isfinite(x))
        return "nan";
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.12g", x);
      return buffer;
    }

    std::string json_number(const double x) { return std::isfinite(x) ? number(x) : "null"; }

    /** Mean and standard error of the mean of realisation-wise values per energy. */
    struct MeanTable
    {
      std::vector<double> sum, sum_sq;
      std::size_t         n = 0;
      void add(const std::vector<double> &values)
      {
        if (sum.empty())
          sum.assign(values.size(), 0.0), sum_sq.assign(values.size(), 0.0);
        for (std::size_t i = 0; i < values.size(); ++i)
          sum[i] += values[i], sum_sq[i] += values[i] * values[i];
        ++n;
      }
      double mean(std::size_t i) const { return n ? sum[i] / n : 0.0; }
      double standard_error(std::size_t i) const
      {
        if (n < 2)
          return 0.0;
        const double m = mean(i);
        return std::sqrt(std::max(0.0, (sum_sq[i] - n * m * m) / (n - 1)) / n);
      }
    };
  } // namespace

  LandscapeStudy::LandscapeStudy(Study &study, const LandscapeSettings &settings)
    : study_(study)
    , settings_(settings)
  {}

  std::vector<std::string> LandscapeStudy::run(const std::string &output_directory,
                                               const bool         show_progress)
  {
    if (dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) != 0)
      return {};
    Study                    &s = study_;
    if (s.sampling_.is_tilted())
      throw InputError("sampling/method = tilted is not supported by the landscape command (its "
                       "averages are unweighted); use sampling/method = plain");
    const UnitSystem         &units = s.units_;
    const unsigned int        dim   = s.lattice_.dimension();
    const auto               &boundaries = s.study_.boundaries;
    const std::vector<double> energies        = s.study_.energies; // user unit
    const std::vector<double> solver_energies = units.to_solver_energies(energies);

    s.make_grid();
    s.setup_system();
    s.assemble();
    const double volume = s.domain_volumes().first;

    // Stored eigenvalues of the same realisations (from `alloyspec run` into this folder).
    std::map<std::pair<std::uint64_t, std::string>, RealisationRecord> stored;
    if (std::filesystem::exists(std::filesystem::path(output_directory) / "realisations.csv"))
      for (auto &r : read_stored_records(output_directory).records)
        stored[{r.realisation, r.boundary}] = std::move(r);

    const std::uint64_t first = s.study_.first_realisation, n = s.study_.realisations;
    std::vector<MeanTable> landscape(boundaries.size());
    std::vector<double>    landscape_seconds(boundaries.size(), 0.0), eigen_seconds(boundaries.size(), 0.0);
    std::vector<bool>      all_stored(boundaries.size(), true);
    std::vector<double>    iterations(boundaries.size(), 0.0), shifts;
    std::vector<double>    first_estimate_error(boundaries.size(), 0.0);
    std::vector<std::size_t> first_estimate_count(boundaries.size(), 0);
    std::ostringstream     estimates_csv;
    estimates_csv << "realisation,boundary,index,estimate,exact\n";

    Progress progress("landscape solves", n * boundaries.size(), show_progress);
    for (std::uint64_t r = first; r < first + n; ++r)
      {
        const std::vector<double> q     = s.solver_cell_values(r);
        const auto [q_min, q_max]       = std::minmax_element(q.begin(), q.end());
        double                    shift = default_landscape_shift(*q_min, *q_max);
        if (settings_.shift)
          {
            shift = units.to_solver_energy(*settings_.shift);
            if (*q_min + shift < 0.0)
              throw InputError("parameter 'landscape/shift': " + number(*settings_.shift) +
                               " is too small for realisation " + std::to_string(r) +
                               " (allowed: at least minus the smallest cell value, " +
                               number(-units.to_user_energy(*q_min)) + ", or 'auto')");
          }
        shifts.push_back(shift);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            const auto start = std::chrono::steady_clock::now();
            const LandscapeField field =
              solve_landscape(*s.discretisations_[b], *s.problems_[b], q, shift, settings_.tolerance);
            std::vector<double> counts =
              landscape_counts(*s.discretisations_[b], dim, field, solver_energies);
            landscape_seconds[b] +=
              std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
            for (double &c : counts)
              c /= volume;
            landscape[b].add(counts);
            iterations[b] += field.iterations;

            const std::string name = to_string(boundaries[b]);
            const auto        it   = stored.find({r, name});
            if (it == stored.end())
              all_stored[b] = false;
            else
              eigen_seconds[b] += it->second.solve_seconds;
            const auto estimates = landscape_eigenvalue_estimates(dim, field, settings_.estimates);
            for (std::size_t k = 0; k < estimates.size(); ++k)
              {
                const double exact = it != stored.end() && k < it->second.eigenvalues.size()
                                       ? it->second.eigenvalues[k]
                                       : std::nan("");
                estimates_csv << r << ',' << name << ',' << k << ','
                              << number(units.to_user_energy(estimates[k])) << ','
                              << number(units.to_user_energy(exact)) << '\n';
                if (k == 0 && std::isfinite(exact) && exact != 0.0)
                  first_estimate_error[b] += (estimates[k] - exact) / exact,
                    ++first_estimate_count[b];
              }
            progress.update((r - first) * boundaries.size() + b + 1);
          }
      }
    progress.finish();

    // landscape.csv: per boundary the landscape count, and the exact one where stored.
    std::ostringstream csv;
    csv << "energy";
    std::vector<std::vector<IdsAccumulator::Row>> exact(boundaries.size());
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::string name = to_string(boundaries[b]);
        csv << ",landscape_" << name << ",landscape_stderr_" << name;
        if (all_stored[b])
          {
            IdsAccumulator acc(solver_energies, volume);
            for (std::uint64_t r = first; r < first + n; ++r)
              {
                const auto &rec = stored.at({r, name});
                acc.add(rec.eigenvalues, rec.complete_up_to);
              }
            exact[b] = acc.rows();
            csv << ",exact_" << name << ",complete_" << name << ",relative_difference_" << name;
          }
      }
    csv << '\n';
    std::vector<std::vector<double>> relative(boundaries.size());
    for (std::size_t i = 0; i < energies.size(); ++i)
      {
        csv << number(energies[i]);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            csv << ',' << number(landscape[b].mean(i)) << ','
                << number(landscape[b].standard_error(i));
            if (all_stored[b])
              {
                const auto  &e   = exact[b][i];
                const double rel = e.mean > 0 ? (landscape[b].mean(i) - e.mean) / e.mean : std::nan("");
                csv << ',' << number(e.mean) << ',' << (e.complete ? 1 : 0) << ',' << number(rel);
                if (e.complete && std::isfinite(rel))
                  relative[b].push_back(std::abs(rel));
              }
          }
        csv << '\n';
      }
    AnalysisInput labels;
    if (units.is_physical())
      labels.energy_column = "energy_" + units.energy_label(),
      labels.solver_energy_unit = units.solver_energy_unit();
    std::filesystem::create_directories(output_directory);
    ResultsStore::write_file_in(output_directory, "landscape.csv", with_energy_columns(csv.str(), labels));
    ResultsStore::write_file_in(output_directory, "landscape_eigenvalues.csv", estimates_csv.str());

    std::vector<std::string> lines;
    std::ostringstream       json;
    json << "{\n  \"realisations\": " << n << ",\n  \"first_realisation\": " << first
         << ",\n  \"energy_unit\": \"" << units.energy_label() << "\",\n  \"volume\": "
         << json_number(volume) << ",\n  \"boundaries\": {";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::string name = to_string(boundaries[b]);
        auto             &rel  = relative[b];
        std::sort(rel.begin(), rel.end());
        const double median = rel.empty() ? std::nan("") : rel[rel.size() / 2];
        const double ratio  = all_stored[b] && landscape_seconds[b] > 0
                                ? eigen_seconds[b] / landscape_seconds[b]
                                : std::nan("");
        const double first_error = first_estimate_count[b]
                                     ? first_estimate_error[b] / first_estimate_count[b]
                                     : std::nan("");
        json << (b ? "," : "") << "\n    \"" << name << "\": {\"landscape_seconds\": "
             << json_number(landscape_seconds[b])
             << ", \"eigen_solve_seconds_stored\": "
             << (all_stored[b] ? json_number(eigen_seconds[b]) : "null")
             << ", \"eigen_over_landscape_time\": " << json_number(ratio)
             << ", \"mean_cg_iterations\": " << json_number(iterations[b] / double(n))
             << ", \"median_abs_relative_difference\": " << json_number(median)
             << ", \"max_abs_relative_difference\": "
             << json_number(rel.empty() ? std::nan("") : rel.back())
             << ", \"mean_relative_error_lowest_eigenvalue_estimate\": " << json_number(first_error)
             << "}";
        std::ostringstream line;
        line << name << ": " << n << " landscape solves in " << number(landscape_seconds[b]) << " s";
        if (all_stored[b])
          line << "; stored eigen-solves took " << number(eigen_seconds[b]) << " s (ratio "
               << number(ratio) << "); |N_W - N|/N: median " << number(median) << ", max "
               << number(rel.empty() ? std::nan("") : rel.back())
               << " over complete grid points with N > 0; lowest-eigenvalue estimate off by "
               << number(100 * first_error) << " % on average";
        else
          line << " (no stored eigenvalues of these realisations in the folder: run 'alloyspec "
                  "run' into it first to compare)";
        lines.push_back(line.str());
      }
    json << "\n  },\n  \"shift_min\": "
         << json_number(units.to_user_energy(*std::min_element(shifts.begin(), shifts.end())))
         << ",\n  \"note\": \"N_W(E) = (1/|V|) int omega_d (E - W)_+^(d/2) / (2 pi)^d dx with W = "
            "1/u - shift, (H + shift) u = 1. Eigen-solve times are those stored by 'alloyspec "
            "run' in realisations.csv, measured on the machine that ran it.\"\n}\n";
    ResultsStore::write_file_in(output_directory, "landscape.json", json.str());
    return lines;
  }
} // namespace alloyspec
