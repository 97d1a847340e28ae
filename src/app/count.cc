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
#include <alloyspec/model/random_stream.h>
#include <alloyspec/model/roulette.h>

#include <deal.II/base/mpi.h>

#include <algorithm>
#include <array>
#include <limits>
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

    // Roulette steers by the counts at one energy: the target, or the only one.
    const bool  roulette = model.sampling().roulette;
    std::size_t target   = 0;
    if (roulette)
      {
        const auto &energies = study.energies;
        if (model.sampling().target_energy)
          {
            const double e = *model.sampling().target_energy;
            for (std::size_t i = 1; i < energies.size(); ++i)
              if (std::abs(energies[i] - e) < std::abs(energies[target] - e))
                target = i;
          }
        else if (energies.size() != 1)
          throw InputError("sampling/target energy: must be set when sampling/roulette = auto "
                           "and the count has several energies (the roulette is tuned for the "
                           "grid energy nearest to it)");
        if (model.sampling().roulette_pilot >= study.realisations)
          throw InputError("sampling/roulette pilot: " +
                           std::to_string(model.sampling().roulette_pilot) +
                           " is not allowed for a count of " + std::to_string(study.realisations) +
                           " realisations; allowed: 20 to " +
                           std::to_string(std::max<std::uint64_t>(study.realisations, 21) - 1) +
                           " (fewer than study/realisations)");
      }

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
    std::ostringstream            lines; // this rank's counts.csv lines
    std::vector<std::size_t>      n_dofs;
    std::size_t                   n_factorisations = 0;
    std::pair<double, std::vector<double>> volumes;
    std::vector<std::unique_ptr<Discretisation>>  discretisations;
    std::vector<std::unique_ptr<SpectralProblem>> problems;
    // One counter per boundary condition: each keeps its own symbolic analysis.
    std::vector<InertiaCounter> counters(boundaries.size());
    std::vector<std::uint64_t>  pilot_part, main_part;
    for (std::uint64_t i = rank; i < study.realisations; i += ranks)
      (roulette && i < model.sampling().roulette_pilot ? pilot_part : main_part)
        .push_back(study.first_realisation + i);
    std::vector<double> pilot_records; // (realisation, ln w, y) per pilot realisation of this rank
    Roulette            table;
    std::size_t         not_solved = 0;

    // One realisation: its counts.csv lines; ln w = 0 exactly when plain.
    auto count_one = [&](const std::uint64_t r) {
      const std::vector<double> q_user = model.potential().cell_values(study.seed, r);
      const double log_w    = model.tilted() ? model.potential().log_weight(q_user) : 0.0;
      const double survival = table.survival(log_w);
      const bool   solved   = !table.active() ||
                            table.solved(uniform_open01(study.seed, r, 0, roulette_draw), log_w);
      // An unsolved realisation needs neither solver units nor a matrix.
      const std::vector<double> q =
        solved ? model.units().to_solver_energies(q_user) : std::vector<double>();
      double y = 0;
      for (std::size_t b = 0; b < boundaries.size(); ++b)
        {
          if (solved)
            discretisations[b]->assemble_potential(q, *problems[b]);
          for (std::size_t i = 0; i < study.energies.size(); ++i)
            {
              lines << r << ',' << to_string(boundaries[b]) << ',' << csv_number(study.energies[i])
                    << ',';
              if (solved)
                {
                  const std::size_t c = counters[b].count_below(*problems[b], solver_energies[i]);
                  lines << c;
                  if (i == target)
                    y += double(c);
                }
              lines << ',' << csv_number(log_w) << ',' << csv_number(survival) << '\n';
            }
        }
      if (!solved)
        ++not_solved;
      if (roulette && !table.active())
        pilot_records.insert(pilot_records.end(), {double(r), log_w, std::exp(log_w) * y});
    };

    // One pass over some of this rank's realisations, with its own progress line.
    auto count_all = [&](const std::vector<std::uint64_t> &part, const char *label) {
      Progress progress(label, part.size(), options.progress && rank == 0 && !part.empty());
      for (std::size_t k = 0; k < part.size(); ++k)
        {
          count_one(part[k]);
          progress.update(k + 1);
        }
      progress.finish();
    };

    {
      const auto [error, input_error] = capture_error([&] {
        auto phase = std::chrono::steady_clock::now();
        for (const Boundary bc : boundaries)
          {
            discretisations.push_back(model.assembled_discretisation(bc));
            problems.push_back(discretisations.back()->make_problem());
            n_dofs.push_back(discretisations.back()->n_dofs());
          }
        volumes = model.domain_volumes(discretisations.front().get());
        timings["set-up"] = seconds_since(phase);
        phase             = std::chrono::steady_clock::now();
        count_all(pilot_part, "pilot realisations");
        timings["counts"] = seconds_since(phase);
        if (roulette)
          timings["roulette_pilot"] = timings["counts"];
      });
      throw_if_any_failed(comm, error, input_error);
    }

    if (roulette)
      {
        // Every rank builds the same table from the same pilot, in realisation order.
        std::vector<std::array<double, 3>> pilot;
        for (const auto &part : dealii::Utilities::MPI::all_gather(comm, pilot_records))
          for (std::size_t j = 0; j + 2 < part.size(); j += 3)
            pilot.push_back({{part[j], part[j + 1], part[j + 2]}});
        std::sort(pilot.begin(), pilot.end());
        std::vector<double> log_weights, summands;
        for (const auto &p : pilot)
          {
            log_weights.push_back(p[1]);
            summands.push_back(p[2]);
          }
        const SamplingSettings &s = model.sampling();
        if (std::none_of(summands.begin(), summands.end(), [](double y) { return y > 0; }))
          throw InputError("sampling/roulette pilot: none of the " + std::to_string(pilot.size()) +
                           " pilot realisations has an eigenvalue below " +
                           csv_number(study.energies[target]) +
                           ", so the roulette has nothing to steer by; allowed: a larger pilot "
                           "(up to 1000000), a stronger sampling/tilt, or roulette = off");
        table = Roulette::from_pilot(log_weights, summands, s.roulette_bins, s.roulette_floor);
        if (rank == 0 && options.progress)
          {
            std::cout << "Roulette from " << pilot.size() << " pilot realisations at E = "
                      << csv_number(study.energies[target]) << ": solved with probability";
            for (const double r : table.survivals())
              std::cout << ' ' << short_number(r, 2);
            std::cout << " across " << table.survivals().size() << " bins of log w\n";
          }
      }

    {
      const auto [error, input_error] = capture_error([&] {
        const auto phase = std::chrono::steady_clock::now();
        count_all(main_part, "realisations");
        for (const auto &c : counters)
          n_factorisations += c.n_factorisations();
        // The pilot's solves and the roulette's together: the cost of the sample.
        timings["counts"] += seconds_since(phase);
      });
      throw_if_any_failed(comm, error, input_error);
    }
    const auto skipped = dealii::Utilities::MPI::sum(not_solved, comm);

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
      double                   survival   = 1; ///< r: the chance it had of being solved
      bool                     solved     = true;
    };
    std::map<std::pair<std::uint64_t, std::string>, Counted> counted;
    const AnalysisInput labels = model.analysis_input(volumes.first);
    // Energies in the user's unit, named as in the other tables (energy_eV, ...).
    // A realisation that the roulette left unsolved has no count (an empty field).
    std::string csv =
      "realisation,boundary," + labels.energy_column + ",count,log_weight,survival\n";
    for (const auto &text : all_lines)
      {
        csv += text;
        std::istringstream in(text);
        for (std::string line; std::getline(in, line);)
          {
            std::istringstream fields(line);
            std::string        r, b, e, c, w, survival;
            std::getline(fields, r, ',');
            std::getline(fields, b, ',');
            std::getline(fields, e, ',');
            std::getline(fields, c, ',');
            std::getline(fields, w, ',');
            std::getline(fields, survival, ',');
            Counted &entry = counted[{std::stoull(r), b}];
            entry.solved   = !c.empty();
            entry.counts.push_back(entry.solved ? std::stoull(c) : 0);
            entry.log_weight = std::stod(w);
            entry.survival   = std::stod(survival);
          }
      }
    store.write_file("counts.csv", csv);

    // Each realisation weighted by its likelihood ratio (1 when plain), as in
    // `run`; under the roulette a solved one by w / r and an unsolved one by 0.
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
              if (!entry.solved)
                {
                  ids.add_counts(entry.counts, -std::numeric_limits<double>::infinity());
                  continue;
                }
              const double log_w = entry.log_weight - std::log(entry.survival);
              ids.add_counts(entry.counts, log_w);
              logs.push_back(log_w);
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
        // %.17g reads back exactly), not drawn a second time. Every realisation's
        // semiclassical count is cheap, so the roulette does not thin this average.
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
    if (roulette)
      {
        Json edges = Json::array(), survival = Json::array();
        for (const double e : table.inner_edges())
          edges.push_back(json_number(e));
        for (const double r : table.survivals())
          survival.push_back(json_number(r));
        manifest["sampling"]["roulette"] = {
          {"pilot_realisations", model.sampling().roulette_pilot},
          {"bins", model.sampling().roulette_bins},
          {"floor", json_number(model.sampling().roulette_floor)},
          {"tuned_at_energy", json_number(study.energies[target])},
          {"log_weight_bin_edges", edges},
          {"survival", survival},
          {"solved", study.realisations - skipped},
          {"not_solved", skipped}};
      }
    else
      manifest["sampling"]["roulette"] = "off";
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
