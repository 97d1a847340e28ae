#include <alloyspec/app/count.h>
#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/sampling.h>
#include <alloyspec/model/weyl_law.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/app/study.h>
#include <alloyspec/solver/inertia_counter.h>

#include <deal.II/base/mpi.h>
#include <deal.II/base/parameter_handler.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <map>
#include <sstream>
#include <stdexcept>

#include <sys/resource.h>

namespace alloyspec
{
  namespace
  {

    std::string number(double x)
    {
      if (!std::isfinite(x))
        return "null";
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.17g", x);
      return buffer;
    }

    double seconds_since(std::chrono::steady_clock::time_point start)
    {
      return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    }
  } // namespace

  void run_inertia_count(dealii::ParameterHandler &prm, const CountOptions &options)
  {
    const MPI_Comm     comm  = MPI_COMM_WORLD;
    const unsigned int rank  = dealii::Utilities::MPI::this_mpi_process(comm);
    const unsigned int ranks = dealii::Utilities::MPI::n_mpi_processes(comm);
    const auto         start = std::chrono::steady_clock::now();

    Lattice                lattice;
    PotentialModel         potential;
    DiscretisationSettings discretisation_settings;
    StudySettings          study;
    lattice.parse_parameters(prm);
    potential.parse_parameters(prm, lattice);
    discretisation_settings.parse_parameters(prm);
    study.parse_parameters(prm);
    SamplingSettings sampling;
    sampling.parse_parameters(prm);
    if (sampling.is_tilted())
      throw InputError("sampling/method = tilted is not supported by the count command (its "
                       "averages are unweighted); use 'alloyspec run', or sampling/method = plain");

    ResultsStore store(options.output_directory, false);
    if (rank == 0)
      store.write_file("parameters.prm", options.parameters_prm);

    std::map<std::string, double> timings;
    std::string                   error;
    bool                          input_error = false;
    std::ostringstream            lines; // this rank's counts.csv lines
    std::vector<std::size_t>      n_dofs;
    std::size_t                   n_factorisations = 0;
    try
      {
        auto phase = std::chrono::steady_clock::now();
        std::vector<std::unique_ptr<Discretisation>>  discretisations;
        std::vector<std::unique_ptr<SpectralProblem>> problems;
        for (const Boundary bc : study.boundaries)
          {
            discretisations.push_back(Discretisation::create(
              lattice, discretisation_settings, BoundaryConditions(lattice.dimension(), bc)));
            discretisations.back()->make_grid();
            discretisations.back()->setup_system();
            discretisations.back()->assemble_fixed();
            problems.push_back(discretisations.back()->make_problem());
            n_dofs.push_back(discretisations.back()->n_dofs());
          }
        timings["setup"] = seconds_since(phase);
        phase            = std::chrono::steady_clock::now();

        // One counter per boundary condition: each keeps its own symbolic analysis.
        std::vector<InertiaCounter> counters(study.boundaries.size());
        std::vector<std::uint64_t>  mine;
        for (std::uint64_t i = rank; i < study.realisations; i += ranks)
          mine.push_back(study.first_realisation + i);
        Progress progress("realisations", mine.size(), options.progress && rank == 0);
        for (std::size_t k = 0; k < mine.size(); ++k)
          {
            const std::vector<double> q = potential.cell_values(study.seed, mine[k]);
            for (std::size_t b = 0; b < study.boundaries.size(); ++b)
              {
                discretisations[b]->assemble_potential(q, *problems[b]);
                for (std::size_t i = 0; i < study.energies.size(); ++i)
                  lines << mine[k] << ',' << to_string(study.boundaries[b]) << ','
                        << number(study.energies[i]) << ','
                        << counters[b].count_below(*problems[b], study.energies[i]) << '\n';
              }
            progress.update(k + 1);
          }
        progress.finish();
        for (const auto &c : counters)
          n_factorisations += c.n_factorisations();
        timings["count"] = seconds_since(phase);
      }
    catch (const InputError &e)
      {
        error       = e.what();
        input_error = true;
      }
    catch (const std::exception &e)
      {
        error = e.what();
      }
    throw_if_any_failed(comm, error, input_error);

    const auto all_lines = dealii::Utilities::MPI::gather(comm, lines.str(), 0);
    rusage     usage{};
    getrusage(RUSAGE_SELF, &usage);
    const double memory_mib     = usage.ru_maxrss / 1024.0;
    const double memory_max_mib = dealii::Utilities::MPI::max(memory_mib, comm);
    const double memory_sum_mib = dealii::Utilities::MPI::sum(memory_mib, comm);
    const auto   factorisations = dealii::Utilities::MPI::sum(n_factorisations, comm);
    if (rank != 0)
      return;

    // Realisation order does not matter for the mean, but sort for a stable file.
    std::map<std::pair<std::uint64_t, std::string>, std::vector<std::size_t>> counts;
    std::string                                                            csv =
      "realisation,boundary,energy,count\n";
    for (const auto &text : all_lines)
      {
        csv += text;
        std::istringstream in(text);
        for (std::string line; std::getline(in, line);)
          {
            std::istringstream fields(line);
            std::string        r, b, e, c;
            std::getline(fields, r, ',');
            std::getline(fields, b, ',');
            std::getline(fields, e, ',');
            std::getline(fields, c, ',');
            counts[{std::stoull(r), b}].push_back(std::stoull(c));
          }
      }
    store.write_file("counts.csv", csv);

    std::vector<std::string> boundaries;
    for (const Boundary bc : study.boundaries)
      boundaries.push_back(to_string(bc));
    std::vector<std::vector<IdsAccumulator::Row>> rows;
    for (const auto &name : boundaries)
      {
        IdsAccumulator ids(study.energies, lattice.volume());
        for (const auto &[key, c] : counts)
          if (key.second == name)
            ids.add_counts(c);
        rows.push_back(ids.rows());
      }
    std::vector<double> semiclassical(study.energies.size(), 0.0);
    for (std::uint64_t r = study.first_realisation;
         r < study.first_realisation + study.realisations; ++r)
      {
        const std::vector<double> q = potential.cell_values(study.seed, r);
        for (std::size_t i = 0; i < study.energies.size(); ++i)
          semiclassical[i] += semiclassical_ids(lattice.dimension(), q, study.energies[i]) /
                              double(study.realisations);
      }
    store.write_file("ids.csv", format_ids_table(boundaries, study.energies, rows, semiclassical,
                                                 study.realisations));

    timings["total"] = seconds_since(start);
    std::ostringstream json;
    json << "{\n  \"program\": \"alloyspec\",\n  \"command\": \"count\",\n  \"version\": \""
         << ALLOYSPEC_VERSION << "\",\n"
         << "  \"seed\": " << study.seed << ",\n"
         << "  \"first_realisation\": " << study.first_realisation << ",\n"
         << "  \"realisations\": " << study.realisations << ",\n"
         << "  \"mpi_ranks\": " << ranks << ",\n"
         << "  \"volume\": " << number(lattice.volume()) << ",\n"
         << "  \"energies\": " << study.energies.size() << ",\n"
         << "  \"numeric_factorisations\": " << factorisations << ",\n"
         << "  \"degrees_of_freedom\": {";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      json << (b ? ", " : "") << '"' << boundaries[b] << "\": " << n_dofs[b];
    json << "},\n  \"timings_seconds\": {";
    bool first = true;
    for (const auto &[name, seconds] : timings)
      {
        json << (first ? "" : ", ") << '"' << name << "\": " << number(seconds);
        first = false;
      }
    json << "},\n  \"memory_high_water_mib\": " << number(memory_max_mib) << ",\n"
         << "  \"memory_high_water_mib_all_ranks\": " << number(memory_sum_mib) << ",\n"
         << "  \"parameters\": " << (options.parameters_json.empty() ? "{}" : options.parameters_json)
         << "\n}\n";
    store.write_file("run.json", json.str());
  }
} // namespace alloyspec
