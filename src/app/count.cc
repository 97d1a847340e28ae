#include <alloyspec/app/count.h>
#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/weyl_law.h>
#include <alloyspec/io/folder_lock.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/sampling_manifest.h>
#include <alloyspec/analysis/tail_table.h>
#include <alloyspec/solver/inertia_counter.h>

#include <deal.II/base/mpi.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <map>
#include <sstream>
#include <stdexcept>

#include <sys/resource.h>

namespace alloyspec
{
  namespace
  {


    double seconds_since(std::chrono::steady_clock::time_point start)
    {
      return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    }
  } // namespace

  void run_inertia_count(const StudyModel &model, const CountOptions &options)
  {
    const MPI_Comm     comm  = MPI_COMM_WORLD;
    const unsigned int rank  = dealii::Utilities::MPI::this_mpi_process(comm);
    const unsigned int ranks = dealii::Utilities::MPI::n_mpi_processes(comm);
    const auto         start = std::chrono::steady_clock::now();
    const StudySettings &study      = model.study();
    const auto          &boundaries = model.boundaries();
    // The automatic tilt comes from a pilot of eigenvalue solves, which belongs to `run`.
    if (model.tilted() && model.sampling().automatic)
      throw InputError("parameter 'sampling/tilt' = auto is not supported by the count command "
                       "(its pilot needs eigenvalues); allowed: a number θ, for example the "
                       "one a 'run' of the same model chose (sampling/tilt in its run.json)");
    // The pilot that turns a target into a degree belongs to `run`; counting
    // the entries' own degree instead would count another operator.
    if (model.error_estimate().accuracy)
      throw InputError("parameter 'discretisation/accuracy' is not supported by the count command "
                       "(allowed: empty; set 'discretisation/degree' and 'elements per cell' "
                       "directly, e.g. to the choice in a run's run.json)");
    // Counts are taken in solver units; the tables show the user's unit.
    const std::vector<double> solver_energies = model.solver_energies("count");

    ResultsStore store(options.output_directory, false);
    // Rank 0 holds the folder for the whole count, so that no run, count or
    // summarise writes there at the same time; every rank learns if it could not.
    std::unique_ptr<FolderLock> lock;
    {
      const auto [lock_error, lock_input_error] = capture_error([&] {
        if (rank != 0)
          return;
        lock = std::make_unique<FolderLock>(options.output_directory, "count there");
        store.write_file(ResultsStore::parameters_file, options.parameters_prm);
      });
      throw_if_any_failed(comm, lock_error, lock_input_error);
    }

    std::map<std::string, double> timings;
    std::string                   error;
    bool                          input_error = false;
    std::ostringstream            lines; // this rank's counts.csv lines
    std::vector<std::size_t>      n_dofs;
    std::size_t                   n_factorisations = 0;
    std::pair<double, std::vector<double>> volumes;
    try
      {
        auto phase = std::chrono::steady_clock::now();
        std::vector<std::unique_ptr<Discretisation>>  discretisations;
        std::vector<std::unique_ptr<SpectralProblem>> problems;
        for (const Boundary bc : boundaries)
          {
            discretisations.push_back(model.assembled_discretisation(bc));
            problems.push_back(discretisations.back()->make_problem());
            n_dofs.push_back(discretisations.back()->n_dofs());
          }
        volumes = model.domain_volumes(discretisations.front().get());
        timings["set-up"] = seconds_since(phase);
        phase             = std::chrono::steady_clock::now();

        // One counter per boundary condition: each keeps its own symbolic analysis.
        std::vector<InertiaCounter> counters(boundaries.size());
        std::vector<std::uint64_t>  mine;
        for (std::uint64_t i = rank; i < study.realisations; i += ranks)
          mine.push_back(study.first_realisation + i);
        Progress progress("realisations", mine.size(), options.progress && rank == 0);
        for (std::size_t k = 0; k < mine.size(); ++k)
          {
            // Drawn from the tilted law when tilted; ln w = 0 exactly when plain.
            const std::vector<double> q_user = model.potential().cell_values(study.seed, mine[k]);
            const std::string log_weight =
              csv_number(model.tilted() ? model.potential().log_weight(q_user) : 0.0);
            const std::vector<double> q = model.units().to_solver_energies(q_user);
            for (std::size_t b = 0; b < boundaries.size(); ++b)
              {
                discretisations[b]->assemble_potential(q, *problems[b]);
                for (std::size_t i = 0; i < study.energies.size(); ++i)
                  lines << mine[k] << ',' << to_string(boundaries[b]) << ','
                        << csv_number(study.energies[i]) << ','
                        << counters[b].count_below(*problems[b], solver_energies[i]) << ','
                        << log_weight << '\n';
              }
            progress.update(k + 1);
          }
        progress.finish();
        for (const auto &c : counters)
          n_factorisations += c.n_factorisations();
        timings["counts"] = seconds_since(phase);
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
    struct Counted
    {
      std::vector<std::size_t> counts; ///< at the grid energies, in order
      double                   log_weight = 0;
    };
    std::map<std::pair<std::uint64_t, std::string>, Counted> counted;
    const AnalysisInput labels = model.analysis_input(volumes.first);
    // Energies in the user's unit, named as in the other tables (energy_eV, ...).
    std::string csv = "realisation,boundary," + labels.energy_column + ",count,log_weight\n";
    for (const auto &text : all_lines)
      {
        csv += text;
        std::istringstream in(text);
        for (std::string line; std::getline(in, line);)
          {
            std::istringstream fields(line);
            std::string        r, b, e, c, w;
            std::getline(fields, r, ',');
            std::getline(fields, b, ',');
            std::getline(fields, e, ',');
            std::getline(fields, c, ',');
            std::getline(fields, w, ',');
            Counted &entry = counted[{std::stoull(r), b}];
            entry.counts.push_back(std::stoull(c));
            entry.log_weight = std::stod(w);
          }
      }
    store.write_file("counts.csv", csv);

    // Each realisation weighted by its likelihood ratio (1 when plain), as in `run`.
    std::vector<std::vector<IdsAccumulator::Row>>            rows;
    std::vector<std::pair<std::string, std::vector<double>>> log_weights;
    std::vector<std::string>                                 warnings;
    for (const auto &name : labels.boundaries)
      {
        IdsAccumulator ids(study.energies, volumes.first);
        auto          &logs = log_weights.emplace_back(name, std::vector<double>()).second;
        for (const auto &[key, entry] : counted)
          if (key.second == name)
            {
              ids.add_counts(entry.counts, entry.log_weight);
              logs.push_back(entry.log_weight);
            }
        rows.push_back(ids.rows());
        if (model.tilted())
          warnings.push_back(weight_warning(name, ids));
      }
    std::vector<double> semiclassical(study.energies.size(), 0.0);
    for (std::uint64_t r = study.first_realisation;
         r < study.first_realisation + study.realisations; ++r)
      {
        // The realisation's weight as counted above (every boundary stores the same one;
        // %.17g reads back exactly), not drawn a second time.
        const auto   found = counted.find({r, labels.boundaries.front()});
        const double w     = found == counted.end() ? 1.0 : std::exp(found->second.log_weight);
        const std::vector<double> n_sc = model.semiclassical_count(r, volumes);
        for (std::size_t i = 0; i < n_sc.size(); ++i)
          semiclassical[i] += w * n_sc[i] / double(study.realisations);
      }
    store.write_file("ids.csv",
                     with_energy_columns(format_ids_table(labels.boundaries, study.energies, rows,
                                                          semiclassical, study.realisations),
                                         labels));
    store.write_file("tail.csv",
                     with_energy_columns(format_tail_table(labels.boundaries, rows,
                                                           options.confidence_level),
                                         labels));
    for (const auto &warning : warnings)
      std::cerr << "alloyspec: warning: " << warning << '\n';

    timings["total"] = seconds_since(start);
    Json manifest = manifest_header("count");
    manifest["seed"]                   = study.seed;
    manifest["first_realisation"]      = study.first_realisation;
    manifest["realisations"]           = study.realisations;
    manifest["mpi_ranks"]              = ranks;
    manifest["volume"]                 = json_number(volumes.first);
    manifest["units"]                  = model.units().description();
    manifest["geometry"]               = model.geometry().description();
    manifest["sampling"]               = sampling_manifest(model.sampling(), "", log_weights);
    manifest["energies"]               = study.energies.size();
    manifest["numeric_factorisations"] = factorisations;
    Json dofs                          = Json::object();
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      dofs[to_string(boundaries[b])] = n_dofs[b];
    manifest["degrees_of_freedom"] = dofs;
    Json phases                    = Json::object();
    for (const auto &[name, seconds] : timings)
      phases[name] = json_number(seconds);
    manifest["timings_seconds"]                 = phases;
    manifest["memory_high_water_mib"]           = json_number(memory_max_mib);
    manifest["memory_high_water_mib_all_ranks"] = json_number(memory_sum_mib);
    manifest["parameters"] = options.parameters_json.empty() ? Json::object() :
                                                               Json::parse(options.parameters_json);
    write_json_file(store.directory(), "run.json", manifest);
  }
} // namespace alloyspec
