/**
 * @file landscape_study.cc  `alloyspec landscape`: the landscape estimate for
 * every realisation of a study, compared with stored eigenvalues.
 */
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/app/landscape_study.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/io/folder_lock.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/core/collective_errors.h>

#include <deal.II/base/mpi.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <map>
#include <optional>
#include <stdexcept>
#include <sstream>

namespace alloyspec
{
  namespace
  {
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

  LandscapeStudy::LandscapeStudy(const StudyModel &model, const LandscapeSettings &settings)
    : model_(model)
    , settings_(settings)
  {}

  std::vector<std::string> LandscapeStudy::run(const std::string &output_directory,
                                               const bool         show_progress)
  {
    const StudyModel &s = model_;
    // A 2D or 3D box is distributed over all ranks, which solve each
    // realisation together; a chain or a mesh file is solved on rank 0 alone.
    const bool distributed = s.lattice().dimension() >= 2 && !s.geometry().has_mesh();
    const bool root        = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0;
    if (!distributed && !root)
      return {};
    if (s.tilted())
      throw InputError("sampling/method = tilted is not supported by the landscape command (its "
                       "averages are unweighted); use sampling/method = plain");
    if (s.error_estimate().accuracy)
      throw InputError("parameter 'discretisation/accuracy' is not supported by the landscape "
                       "command (allowed: empty; set 'discretisation/degree' and 'elements per "
                       "cell' directly, e.g. to the choice in a run's run.json)");
    const UnitSystem         &units      = s.units();
    const unsigned int        dim        = s.lattice().dimension();
    const auto               &boundaries = s.boundaries();
    const std::vector<double> energies        = s.study().energies; // user unit
    const std::vector<double> solver_energies = s.solver_energies("landscape");

    // The same discretisations as an eigenvalue study of this model.
    std::vector<std::unique_ptr<Discretisation>>  discretisations;
    std::vector<std::unique_ptr<SpectralProblem>> problems;
    for (const Boundary bc : boundaries)
      {
        if (distributed)
          {
            discretisations.push_back(s.make_distributed_discretisation(bc, MPI_COMM_WORLD));
            discretisations.back()->make_grid();
            discretisations.back()->setup_system();
            discretisations.back()->assemble_fixed();
          }
        else
          discretisations.push_back(s.assembled_discretisation(bc));
        problems.push_back(discretisations.back()->make_problem());
      }
    const double volume = s.domain_volumes(discretisations.front().get()).first;

    // Rank 0 owns the folder. Nobody writes eigenvalues into it while they
    // are compared here. Every rank learns its verdict (no rank waits for one
    // that gave up).
    std::optional<FolderLock>                                          lock;
    std::map<std::pair<std::uint64_t, std::string>, RealisationRecord> stored;
    {
      const auto [error, input_error] = capture_error([&] {
        if (!root)
          return;
        std::filesystem::create_directories(output_directory);
        lock.emplace(output_directory, "compare the landscape there");
        // Stored eigenvalues of the same realisations (from `alloyspec run` into this folder).
        if (std::filesystem::exists(std::filesystem::path(output_directory) / "realisations.csv"))
          for (auto &r : read_stored_records(output_directory).records)
            stored[{r.realisation, r.boundary}] = std::move(r);
      });
      if (distributed)
        throw_if_any_failed(MPI_COMM_WORLD, error, input_error);
      else if (!error.empty())
        {
          if (input_error)
            throw InputError(error);
          throw std::runtime_error(error);
        }
    }

    const std::uint64_t first = s.study().first_realisation, n = s.study().realisations;
    std::vector<MeanTable> landscape(boundaries.size());
    std::vector<double>    landscape_seconds(boundaries.size(), 0.0), eigen_seconds(boundaries.size(), 0.0);
    std::vector<bool>      all_stored(boundaries.size(), true);
    std::vector<double>    iterations(boundaries.size(), 0.0), shifts;
    std::vector<double>    first_estimate_error(boundaries.size(), 0.0);
    std::vector<std::size_t> first_estimate_count(boundaries.size(), 0);
    std::ostringstream     estimates_csv;
    estimates_csv << "realisation,boundary,index,estimate,exact\n";

    Progress progress("landscape solves", n * boundaries.size(), show_progress && root);
    for (std::uint64_t r = first; r < first + n; ++r)
      {
        // On a distributed mesh each rank draws the cells of its own elements.
        const auto draw = [&](const Discretisation &mesh) {
          return units.to_solver_energies(
            s.potential().cell_values(s.study().seed, r, mesh.local_cells()));
        };
        const std::vector<double> q = distributed ? draw(*discretisations.front()) : s.solver_cell_values(r);
        // A rank may own no element of a tiny box: its extremes are ±∞.
        double q_min = std::numeric_limits<double>::infinity(), q_max = -q_min;
        for (const double v : q)
          q_min = std::min(q_min, v), q_max = std::max(q_max, v);
        if (distributed)
          q_min = dealii::Utilities::MPI::min(q_min, MPI_COMM_WORLD),
          q_max = dealii::Utilities::MPI::max(q_max, MPI_COMM_WORLD);
        double shift = default_landscape_shift(q_min, q_max);
        if (settings_.shift)
          {
            shift = units.to_solver_energy(*settings_.shift);
            if (q_min + shift < 0.0)
              throw InputError("parameter 'landscape/shift': " + short_number(*settings_.shift) +
                               " is too small for realisation " + std::to_string(r) +
                               " (allowed: at least minus the smallest cell value, " +
                               short_number(-units.to_user_energy(q_min)) + ", or 'auto')");
          }
        shifts.push_back(shift);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            const auto start = std::chrono::steady_clock::now();
            const LandscapeField field =
              solve_landscape(*discretisations[b], *problems[b],
                              distributed && b > 0 ? draw(*discretisations[b]) : q, shift,
                              settings_.tolerance);
            std::vector<double> counts =
              landscape_counts(*discretisations[b], dim, field, solver_energies);
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
                              << csv_number(units.to_user_energy(estimates[k])) << ','
                              << csv_number(units.to_user_energy(exact)) << '\n';
                if (k == 0 && std::isfinite(exact) && exact != 0.0)
                  first_estimate_error[b] += (estimates[k] - exact) / exact,
                    ++first_estimate_count[b];
              }
            progress.update((r - first) * boundaries.size() + b + 1);
          }
      }
    progress.finish();
    if (!root)
      return {};

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
        csv << csv_number(energies[i]);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            csv << ',' << csv_number(landscape[b].mean(i)) << ','
                << csv_number(landscape[b].standard_error(i));
            if (all_stored[b])
              {
                const auto  &e   = exact[b][i];
                const double rel = e.mean > 0 ? (landscape[b].mean(i) - e.mean) / e.mean : std::nan("");
                csv << ',' << csv_number(e.mean) << ',' << (e.complete ? 1 : 0) << ',' << csv_number(rel);
                if (e.complete && std::isfinite(rel))
                  relative[b].push_back(std::abs(rel));
              }
          }
        csv << '\n';
      }
    const AnalysisInput labels = s.analysis_input(volume);
    ResultsStore::write_file_in(output_directory, "landscape.csv", with_energy_columns(csv.str(), labels));
    ResultsStore::write_file_in(output_directory, "landscape_eigenvalues.csv", estimates_csv.str());

    std::vector<std::string> lines;
    Json manifest = manifest_header("landscape");
    manifest["realisations"]      = n;
    manifest["first_realisation"] = first;
    manifest["energy_unit"]       = units.energy_label();
    manifest["volume"]            = json_number(volume);
    Json per_boundary             = Json::object();
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
        per_boundary[name] = {
          {"landscape_seconds", json_number(landscape_seconds[b])},
          {"eigen_solve_seconds_stored", all_stored[b] ? json_number(eigen_seconds[b]) : Json()},
          {"eigen_over_landscape_time", json_number(ratio)},
          {"mean_cg_iterations", json_number(iterations[b] / double(n))},
          {"median_abs_relative_difference", json_number(median)},
          {"max_abs_relative_difference", json_number(rel.empty() ? std::nan("") : rel.back())},
          {"mean_relative_error_lowest_eigenvalue_estimate", json_number(first_error)}};
        std::ostringstream line;
        line << name << ": " << n << " landscape solves in " << short_number(landscape_seconds[b]) << " s";
        if (all_stored[b])
          line << "; stored eigen-solves took " << short_number(eigen_seconds[b]) << " s (ratio "
               << short_number(ratio) << "); |N_W - N|/N: median " << short_number(median) << ", max "
               << short_number(rel.empty() ? std::nan("") : rel.back())
               << " over complete grid points with N > 0; lowest-eigenvalue estimate off by "
               << short_number(100 * first_error) << " % on average";
        else
          line << " (no stored eigenvalues of these realisations in the folder: run 'alloyspec "
                  "run' into it first to compare)";
        lines.push_back(line.str());
      }
    manifest["boundaries"] = per_boundary;
    manifest["shift_min"] =
      json_number(units.to_user_energy(*std::min_element(shifts.begin(), shifts.end())));
    manifest["method"] = "N_W(E) = (1/|V|) int omega_d (E - W)_+^(d/2) / (2 pi)^d dx with W = "
                         "1/u - shift, (H + shift) u = 1. Eigen-solve times are those stored by "
                         "'alloyspec run' in realisations.csv, measured on the machine that ran it.";
    write_json_file(output_directory, "landscape.json", manifest);
    return lines;
  }
} // namespace alloyspec
