#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/solver/landscape.h>
#include <alloyspec/core/interrupt.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/io/folder_lock.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/parameter_text.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/io/sampling_manifest.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/app/study.h>
#include <alloyspec/solver/team.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/model/energy_grid.h>
#include <alloyspec/model/weyl_law.h>

#include <deal.II/base/mpi.h>
#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <algorithm>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <limits>
#include <numeric>
#include <optional>
#include <cmath>
#include <cstdio>
#include <set>
#include <sstream>

#include <sys/resource.h>
#include <unistd.h>

namespace alloyspec
{
  namespace
  {
    /** Adds the wall time of its scope to one entry of a timing table (appended when new). */
    class ScopedTimer
    {
    public:
      ScopedTimer(Study::PhaseTimings &table, std::string name)
        : table_(table)
        , name_(std::move(name))
        , start_(std::chrono::steady_clock::now())
      {}
      ~ScopedTimer()
      {
        const double seconds =
          std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
        const auto entry = std::find_if(table_.begin(), table_.end(),
                                        [&](const auto &e) { return e.first == name_; });
        if (entry == table_.end())
          table_.emplace_back(name_, seconds);
        else
          entry->second += seconds;
      }

    private:
      Study::PhaseTimings                  &table_;
      std::string                           name_;
      std::chrono::steady_clock::time_point start_;
    };

    /** This process's resident high-water mark (VmHWM of /proc/self/status) in MiB; 0 if unknown. */
    double high_water_mib()
    {
      std::ifstream status("/proc/self/status");
      std::string   line;
      while (std::getline(status, line))
        if (line.rfind("VmHWM:", 0) == 0)
          return std::strtod(line.c_str() + 6, nullptr) / 1024.0;
      return 0.0;
    }

    /** Bytes of physical memory of this machine (0 if unknown). */
    double physical_memory_bytes()
    {
      const long pages = ::sysconf(_SC_PHYS_PAGES), page = ::sysconf(_SC_PAGESIZE);
      return pages > 0 && page > 0 ? double(pages) * double(page) : 0.0;
    }

    std::string gibibytes(double bytes)
    {
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.3g GiB", bytes / 1073741824.0);
      return buffer;
    }

    /** run.json's "factor_work": the rows of Study::factor_work_ as named numbers. */
    Json factor_work_json(const std::vector<double> &factor_work, const std::size_t stride,
                          const std::vector<Boundary> &boundaries)
    {
      Json rows = Json::array();
      for (std::size_t i = 0; i + stride <= factor_work.size(); i += stride)
        {
          const double *row = factor_work.data() + i;
          const auto    entries = static_cast<std::uint64_t>(row[2]);
          rows.push_back({{"boundary", to_string(boundaries[std::size_t(row[0])])},
                          {"realisation", static_cast<std::uint64_t>(row[1])},
                          {"factor_entries", entries},
                          {"factor_bytes", entries * sizeof(double)},
                          {"solve_calls", static_cast<std::uint64_t>(row[3])},
                          {"solved_columns", static_cast<std::uint64_t>(row[4])},
                          {"factor_passes", static_cast<std::uint64_t>(row[5])},
                          {"numeric_factorisations", static_cast<std::uint64_t>(row[6])},
                          {"factorisation_flops", json_number(row[7])},
                          {"eigen_solver_seconds", json_number(row[8])},
                          {"realisation_seconds", json_number(row[9])},
                          {"rhs_block", static_cast<std::uint64_t>(row[10])},
                          {"factorisation_seconds", json_number(row[11])},
                          {"factor_solve_seconds", json_number(row[12])}});
        }
      return {{"description",
               "per realisation solved by this run: entries of the shift-and-invert factor "
               "(MUMPS INFOG(29)) and their bytes as doubles; solve calls with it, right-hand "
               "sides, and passes over the factor (each a forward and a backward sweep; a call "
               "with b right-hand sides counts ceil(b / rhs_block), rhs_block the most MUMPS "
               "treats at once, |ICNTL(27)|); numeric factorisations including the inertia "
               "checks, their operations (MUMPS RINFOG(3)) and seconds; seconds in the solves "
               "with the factor, in the eigen-solver, and for the whole realisation (null where "
               "the single-vector path does not expose a time)"},
              {"per_realisation", rows}};
    }
  } // namespace

  Study::Study()  = default;
  Study::~Study() = default;

  void Study::declare_parameters(dealii::ParameterHandler &prm) { declare_all_parameters(prm); }

  void Study::parse_parameters(dealii::ParameterHandler &prm)
  {
    model_.parse_parameters(prm);
    analysis_.parse_parameters(prm);
    // Checked here too, although only `landscape` uses them: a run accepts no
    // entry it has not checked.
    LandscapeSettings landscape;
    landscape.parse_parameters(prm);
  }

  void Study::check_memory() const
  {
    // A lower estimate, to refuse what cannot fit before anything is written
    // (the documented maxima died with a bare std::bad_alloc). Per boundary
    // condition: the mesh (about 1 KiB per element in deal.II's triangulation
    // and DoF handler; common practice, no source), K and M (value and column
    // index per entry, (2p + 1)^d entries per row) and a factor at least as
    // large as K; plus the stored eigenpairs of every realisation, which the
    // tables hold at once (5 numbers each).
    const unsigned int dim = model_.lattice().dimension();
    const double       p   = model_.discretisation().degree;
    const double       r   = model_.discretisation().elements_per_cell;
    double elements = 1, dofs = 1;
    for (unsigned int d = 0; d < dim; ++d)
      {
        elements *= model_.lattice().cells()[d] * r;
        dofs *= model_.lattice().cells()[d] * r * p + 1;
      }
    const double row          = std::pow(2 * p + 1, double(dim));
    const double per_boundary = model_.geometry().has_mesh() ? 0.0 : 1024.0 * elements + 3 * 12.0 * dofs * row;
    const double k            = model_.solver().energy_cutoff ? model_.solver().max_eigenvalues :
                                                                 model_.solver().n_eigenvalues;
    const double records = double(model_.study().realisations) * model_.boundaries().size() * k * 5 * 8;
    const double total   = per_boundary * model_.boundaries().size() + records;
    const double memory  = physical_memory_bytes();
    if (memory > 0 && total > memory)
      throw InputError("the study needs at least " + gibibytes(total) + " of memory (" +
                       gibibytes(per_boundary * model_.boundaries().size()) +
                       " for the meshes, matrices and factors of 'lattice/cells' = " +
                       model_.lattice().description() + ", " + gibibytes(records) + " for the eigenvalues of " +
                       std::to_string(model_.study().realisations) +
                       " realisations), more than this machine's " + gibibytes(memory) +
                       ": use fewer cells, a lower 'discretisation/degree', fewer "
                       "'study/realisations' (studies of disjoint realisations can be merged "
                       "by summarise) or fewer eigenvalues");
  }

  void Study::run(const RunOptions &options)
  {
    const bool root = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0;
    // Every rank parsed the same file, so every rank refuses alike, before any work.
    if (model_.sampling().roulette)
      throw InputError("parameter 'sampling/roulette' = auto is not supported by the run command "
                       "(a skipped realisation would leave no spectrum for the eigenvalue "
                       "tables); allowed: off, or use the count command for counts at fixed "
                       "energies");
    // Checked before anything is written (the same verdict on every rank).
    teams_ = std::make_unique<RealisationTeams>(options.ranks_per_realisation);
    check_memory();
    // SIGINT/SIGTERM from here on finish the running realisation first.
    std::optional<InterruptGuard> interrupt_guard(std::in_place);
    output_directory_ = options.output_directory;

    // Rank 0 owns the folder: it checks it, creates it, locks it for the whole
    // run and records the parameters. Every rank learns the verdict, so that
    // no rank waits for one that gave up (a hang).
    std::optional<ResultsStore> store;
    std::unique_ptr<FolderLock> lock;
    bool                        wrote_parameters = false;
    stored_any_                                  = false;
    wrote_tilt_                                  = false;
    // A run refused before it stored anything leaves the folder as it found it.
    auto roll_back = [&] {
      if (!root || !store || stored_any_)
        return;
      std::error_code ignored;
      if (wrote_parameters)
        std::filesystem::remove(store->path(ResultsStore::parameters_file), ignored);
      if (wrote_tilt_)
        std::filesystem::remove(store->path(StudyModel::tilt_file), ignored);
      const bool created = store->created_folder();
      lock.reset();
      if (created)
        std::filesystem::remove(options.output_directory, ignored); // only if empty
    };
    {
      const auto [error, input_error] = capture_error([&] {
        if (!root)
          return;
        store.emplace(options.output_directory, options.resume);
        lock = std::make_unique<FolderLock>(options.output_directory,
                                            options.resume ? "resume the study there" :
                                                             "run a study there");
        if (lock->took_over_stale())
          std::cerr << "alloyspec: warning: the folder's lock was left by a run that ended "
                       "without releasing it ("
                    << lock->stale_holder() << "); taken over\n";
        // Another run may have filled the folder before the lock was ours.
        if (!options.resume)
          store->refuse_earlier_study();
        wrote_parameters = check_and_record_parameters(*store, options);
        if (options.resume)
          for (const auto &warning : store->prepare_resume())
            std::cerr << "alloyspec: warning: " << warning << '\n';
      });
      if (!error.empty())
        roll_back();
      throw_if_any_failed(MPI_COMM_WORLD, error, input_error);
    }
    if (!root)
      store.emplace(ResultsStore::attach(options.output_directory));
    try
      {
        if (model_.error_estimate().accuracy)
          {
            ScopedTimer t(timings_, "pilot_choice");
            choose_for_accuracy(root, options.memory_budget_bytes > 0 ? options.memory_budget_bytes :
                                                                        default_memory_budget());
          }
        // The labels users see (console, run.json) say what each phase produces.
        { ScopedTimer t(timings_, "mesh");         make_grid(); }
        { ScopedTimer t(timings_, "unknowns");     setup_system(); }
        { ScopedTimer t(timings_, "matrices");     assemble(); }
        // A rank over its budget stops every rank of its problem with status 2.
        solver_->set_memory_budget(options.memory_budget_bytes);
        if (model_.sampling().is_tilted() && model_.sampling().automatic)
          {
            ScopedTimer t(timings_, "tilt_search");
            choose_tilt(*store, options, root);
          }
        { ScopedTimer t(timings_, "eigen_solves"); solve(*store, options); }
      }
    catch (const Interrupted &)
      {
        throw;
      }
    catch (...)
      {
        roll_back();
        throw;
      }
    // The guard stays up: a stop request that arrives once every realisation
    // is stored lets the (quick) tables be written rather than die half-way
    // through them (a second signal still ends the process at once); the run
    // then ends with the signal's status, as any stopped run does.
    const auto [error, input_error] = capture_error([&] {
      if (root)
        {
          ScopedTimer t(timings_, "tables");
          postprocess(*store, options);
        }
    });
    throw_if_any_failed(MPI_COMM_WORLD, error, input_error);
    if (const int signal = dealii::Utilities::MPI::max(InterruptGuard::received(), MPI_COMM_WORLD))
      throw Interrupted(signal, "stopped on " + signal_name(signal) +
                                  " while the tables were written; all " +
                                  std::to_string(model_.study().realisations) +
                                  " realisations are stored in '" + store->directory() +
                                  "' and the tables were completed");
  }

  void Study::make_grid()
  {
    // The baseline of the per-rank memory figures of run.json: what MPI,
    // PETSc and the libraries hold before any part of the problem exists.
    memory_before_mesh_mib_ = high_water_mib();
    discretisations_.clear();
    const bool distributed = model_.distributed_mesh();
    for (const Boundary bc : model_.boundaries())
      {
        discretisations_.push_back(
          distributed ? model_.make_distributed_discretisation(bc, teams_->communicator()) :
                        model_.make_discretisation(bc));
        discretisations_.back()->make_grid();
      }
    if (dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0 && !discretisations_.empty())
      for (const auto &note : discretisations_.front()->notes())
        std::cerr << "alloyspec: warning: " << note << '\n';
  }

  void Study::setup_system()
  {
    for (auto &d : discretisations_)
      d->setup_system();
  }

  void Study::assemble()
  {
    problems_.clear();
    for (std::size_t b = 0; b < discretisations_.size(); ++b)
      {
        discretisations_[b]->assemble_fixed();
        problems_.push_back(discretisations_[b]->make_problem());
        // Fewer unknowns than eigenvalues wanted: the solver returns them all.
        // None at all (every node on a Dirichlet face) leaves nothing to count.
        if (problems_.back()->n_genuine() == 0)
          throw InputError("parameter 'discretisation/degree': with degree " +
                           std::to_string(model_.discretisation().degree) + " and " +
                           std::to_string(model_.discretisation().elements_per_cell) +
                           " element(s) per cell, the " + to_string(model_.boundaries()[b]) +
                           " problem on " + model_.lattice().description() +
                           " has no unknowns (every node lies on a constrained face); raise "
                           "'discretisation/degree' or 'discretisation/elements per cell'");
      }
    solver_ = std::make_unique<EigenSolver>(model_.solver());
    solver_->use_teams(teams_.get());
    estimators_.clear();
    if (model_.error_estimate().enabled())
      for (const Boundary bc : model_.boundaries())
        {
          // The richer space halves h: twice the elements per cell on a box,
          // one more refinement of a mesh file.
          std::unique_ptr<Discretisation> d = model_.make_discretisation(bc, true);
          estimators_.push_back(std::make_unique<ErrorEstimator>(
            std::move(d), model_.discretisation(), model_.solver(), RicherSpace::mesh));
        }
  }

  double Study::default_memory_budget()
  {
    MPI_Comm node;
    MPI_Comm_split_type(MPI_COMM_WORLD, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node);
    int ranks_here = 1;
    MPI_Comm_size(node, &ranks_here);
    MPI_Comm_free(&node);
    const double memory = physical_memory_bytes();
    // Unknown memory: the smallest machine the README supports.
    return 0.5 * (memory > 0 ? memory : 8.0 * 1073741824.0) / std::max(ranks_here, 1);
  }

  void Study::choose_for_accuracy(const bool root, const double budget_bytes)
  {
    const Boundary bc = model_.boundaries().front();
    discretisation_choice_ = choose_discretisation(
      model_.lattice(), model_.geometry().conditions(bc, model_.lattice().dimension()),
      model_.solver(), model_.solver_cell_values(model_.study().first_realisation),
      *model_.error_estimate().accuracy, budget_bytes);
    // Only degree and r change: the error estimate and the target stay as given.
    DiscretisationSettings chosen = model_.discretisation();
    chosen.degree                 = discretisation_choice_->settings.degree;
    chosen.elements_per_cell      = discretisation_choice_->settings.elements_per_cell;
    model_.set_discretisation(chosen);
    if (root)
      {
        const DiscretisationChoice &c = *discretisation_choice_;
        std::cout << "Choosing degree and elements per cell for 'discretisation/accuracy' = "
                  << *model_.error_estimate().accuracy << " (realisation "
                  << model_.study().first_realisation << "; error estimated on a pilot box of ";
        for (std::size_t i = 0; i < c.pilot_cells.size(); ++i)
          std::cout << (i ? " x " : "") << c.pilot_cells[i];
        std::cout << " of its cells, Neumann faces, " << c.pilot_eigenvalues
                  << " eigenvalues up to " << pilot_energy_margin << " times the study's highest, "
                  << short_number(model_.units().to_user_energy(c.energy_ceiling), 4) << ' '
                  << model_.units().energy_label() << "; memory budget " << gibibytes(budget_bytes) << "):\n"
                  << c.log << "Chosen: degree " << model_.discretisation().degree
                  << ", elements per cell " << model_.discretisation().elements_per_cell
                  << std::endl;
      }
  }

  RealisationRecord Study::solve_one(std::uint64_t realisation, std::size_t b)
  {
    const auto start = std::chrono::steady_clock::now();
    // Drawn once: the solver's values and the likelihood ratio of the same cells.
    // On a distributed mesh a rank draws the values of its own cells only.
    const Discretisation     &mesh   = *discretisations_[b];
    const std::vector<double> q_user =
      mesh.distributed() ?
        model_.potential().cell_values(model_.study().seed, realisation, mesh.local_cells()) :
        model_.potential().cell_values(model_.study().seed, realisation);
    const std::vector<double> q = model_.units().to_solver_energies(q_user);
    discretisations_[b]->assemble_potential(q, *problems_[b]);
    EigenResult result = solver_->solve(*problems_[b]);

    RealisationRecord record;
    record.realisation    = realisation;
    record.boundary       = to_string(model_.boundaries()[b]);
    record.eigenvalues    = result.eigenvalues;
    record.residuals      = result.residuals;
    record.complete_up_to = result.complete_up_to;
    record.inertia_count  = result.inertia_count;
    record.verified_by    = result.verified_by;
    record.enclosure_lower = result.enclosure_lower;
    record.enclosure_upper = result.enclosure_upper;
    // A rank of a distributed mesh may own no element of a tiny box: ±∞ then.
    record.potential_min = std::numeric_limits<double>::infinity();
    record.potential_max = -record.potential_min;
    for (const double v : q)
      record.potential_min = std::min(record.potential_min, v),
      record.potential_max = std::max(record.potential_max, v);
    record.attempts       = result.attempts;
    if (mesh.distributed())
      {
        // The extremes over the whole box; plain sampling only
        // (StudyModel::distributed_mesh), whose log-likelihood ratio is 0.
        const MPI_Comm team  = teams_->communicator();
        record.potential_min = dealii::Utilities::MPI::min(record.potential_min, team);
        record.potential_max = dealii::Utilities::MPI::max(record.potential_max, team);
        record.log_weight    = 0.0;
      }
    else
      record.log_weight = model_.potential().log_weight(q_user);
    // The central cell (floor(L_i/2)) for the local-trace estimator.
    std::array<unsigned int, 3> centre{{0, 0, 0}};
    for (unsigned int d = 0; d < model_.lattice().dimension(); ++d)
      centre[d] = model_.lattice().cells()[d] / 2;
    const std::size_t central_cell = model_.lattice().cell_index(centre);
    discretisations_[b]->localisation_measures(result.eigenvectors, central_cell,
                                               record.inverse_participation_ratios,
                                               record.central_weights);
    if (!estimators_.empty())
      record.errors = estimators_[b]->errors(q, result.eigenvalues);
    export_eigenfunctions(realisation, b, q, result);
    write_eigenfunction_slices(realisation, b, result);
    record.solve_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    // On a team the factor is shared: its leader alone reports the work.
    if (!teams_ || teams_->leader())
      {
        const SolveWork &w = result.work;
        factor_work_.insert(factor_work_.end(),
                            {double(b), double(realisation), double(w.factor_entries),
                             double(w.solve_calls), double(w.solved_columns), double(w.factor_passes),
                             double(w.numeric_factorisations), w.factorisation_flops, w.seconds,
                             record.solve_seconds, double(w.rhs_block), w.factorisation_seconds,
                             w.factor_solve_seconds});
      }
    return record;
  }

  void Study::export_eigenfunctions(std::uint64_t realisation, std::size_t b,
                                    const std::vector<double> &q, const EigenResult &result) const
  {
    // One file per solve: only the rank that reports a team's realisation writes it.
    if ((teams_ && !teams_->leader()) || model_.study().export_eigenfunctions.empty() ||
        std::find(model_.study().export_realisations.begin(), model_.study().export_realisations.end(),
                  realisation) == model_.study().export_realisations.end())
      return;
    std::vector<std::string>         names;
    std::vector<std::vector<double>> fields;
    for (const unsigned int i : model_.study().export_eigenfunctions)
      if (i < result.eigenvectors.size())
        {
          char name[64];
          std::snprintf(name, sizeof name, "psi_%u_E=%.6g", i, result.eigenvalues[i]);
          names.emplace_back(name);
          fields.push_back(result.eigenvectors[i]);
        }
    const std::string file = "eigenfunctions_r" + std::to_string(realisation) + "_" +
                             to_string(model_.boundaries()[b]) + ".vtu";
    discretisations_[b]->write_vtu(
      (std::filesystem::path(output_directory_) / file).string(), q, names, fields);
  }

  void Study::write_eigenfunction_slices(std::uint64_t realisation, std::size_t b,
                                         const EigenResult &result) const
  {
    // Maps for the report of a fixed potential: its first realisation only.
    const bool fixed = !model_.potential().is_random() || model_.study().realisations == 1;
    // On a distributed mesh every rank of the team samples its own elements.
    const bool together = discretisations_[b]->distributed();
    if (!fixed || realisation != model_.study().first_realisation ||
        (teams_ && !teams_->leader() && !together) || result.eigenvectors.empty())
      return;
    const std::size_t count = std::min<std::size_t>(result.eigenvectors.size(), 4);
    std::vector<std::vector<std::array<double, 3>>> slices;
    for (std::size_t j = 0; j < count; ++j)
      slices.push_back(discretisations_[b]->slice_values(result.eigenvectors[j]));
    if (teams_ && !teams_->leader())
      return;
    std::ostringstream csv;
    const std::string  unit = model_.units().is_physical() ? "_" + model_.units().length_label() : "";
    csv << "x" << unit << ",y" << unit;
    for (std::size_t j = 0; j < count; ++j)
      csv << ",psi_" << j;
    csv << '\n';
    for (std::size_t k = 0; k < slices[0].size(); ++k)
      {
        csv << csv_number(slices[0][k][0]) << ',' << csv_number(slices[0][k][1]);
        for (std::size_t j = 0; j < count; ++j)
          csv << ',' << csv_number(slices[j][k][2]);
        csv << '\n';
      }
    ResultsStore::write_file_in(output_directory_,
                                "eigenfunction_slice_" + to_string(model_.boundaries()[b]) + ".csv",
                                csv.str());
  }

  void Study::solve(const ResultsStore &store, const RunOptions &options)
  {
    const MPI_Comm     comm  = MPI_COMM_WORLD;
    const unsigned int rank  = dealii::Utilities::MPI::this_mpi_process(comm);
    const unsigned int ranks = dealii::Utilities::MPI::n_mpi_processes(comm);

    // A realisation is done when all its boundary conditions are stored.
    std::set<std::uint64_t> done;
    if (options.resume)
      {
        std::map<std::uint64_t, std::size_t> stored;
        const auto [error, input_error] = capture_error([&] {
          // Rank 0 has already read these strictly and cut any torn remains.
          for (const auto &r : read_stored_records(store.directory()).records)
            ++stored[r.realisation];
        });
        throw_if_any_failed(comm, error, input_error);
        for (const auto &[r, n] : stored)
          if (n == model_.boundaries().size())
            done.insert(r);
      }
    std::vector<std::uint64_t> pending;
    for (std::uint64_t r = model_.study().first_realisation;
         r < model_.study().first_realisation + model_.study().realisations; ++r)
      if (done.count(r) == 0)
        pending.push_back(r);

    // A team (one rank, or several sharing each realisation) takes one
    // realisation per round; its leader reports it.
    const unsigned int teams = teams_->count();
    Progress progress("realisations", pending.size(), options.progress && rank == 0);
    const std::size_t rounds = (pending.size() + teams - 1) / teams;
    for (std::size_t round = 0; round < rounds; ++round)
      {
        // A stop request on any rank stops all, between two rounds, so every
        // finished realisation is stored.
        if (const int signal = dealii::Utilities::MPI::max(InterruptGuard::received(), comm))
          {
            progress.finish();
            const std::size_t stored =
              model_.study().realisations - pending.size() + std::min(pending.size(), round * teams);
            throw Interrupted(signal, "stopped on " + signal_name(signal) + ": " +
                                        std::to_string(stored) + " of " +
                                        std::to_string(model_.study().realisations) +
                                        " realisations are stored in '" + store.directory() + "'");
          }
        const std::size_t slot = round * teams + teams_->index();
        std::string       eigen_text, summary_text;
        const auto [error, input_error] = capture_error([&] {
          if (slot < pending.size())
            for (std::size_t b = 0; b < model_.boundaries().size(); ++b)
              {
                progress.phase("solving realisation " + std::to_string(pending[slot]) + ", " +
                               to_string(model_.boundaries()[b]));
                const RealisationRecord record = solve_one(pending[slot], b);
                if (!teams_->leader())
                  continue;
                eigen_text += record.eigenvalue_lines();
                summary_text += record.summary_line();
                ++solved_here_;
              }
        });
        // Rank 0 owns the files; it appends every finished realisation of
        // this round before any rank starts the next one. A failed write (a
        // full disk) is reported to every rank like a failed solve, so none
        // waits for a round that never comes.
        const auto eigen_all   = dealii::Utilities::MPI::gather(comm, eigen_text, 0);
        const auto summary_all = dealii::Utilities::MPI::gather(comm, summary_text, 0);
        const auto [write_error, write_input_error] = capture_error([&] {
          if (rank != 0)
            return;
          for (unsigned int p = 0; p < ranks; ++p)
            if (!summary_all[p].empty())
              {
                store.append_text(eigen_all[p], summary_all[p]);
                stored_any_ = true;
              }
          progress.update(std::min(pending.size(), (round + 1) * teams));
        });
        // After storing what the other ranks finished; a solve's error first.
        if (error.empty())
          throw_if_any_failed(comm, write_error, write_input_error);
        else
          throw_if_any_failed(comm, error, input_error);
      }
    progress.finish();
    const double high_water = high_water_mib();
    memory_per_rank_ = {{dealii::Utilities::MPI::max(memory_before_mesh_mib_, comm),
                         dealii::Utilities::MPI::max(high_water, comm),
                         dealii::Utilities::MPI::max(high_water - memory_before_mesh_mib_, comm)}};
    // Rank 0 writes run.json: it collects every leader's factor work.
    const auto gathered = dealii::Utilities::MPI::gather(comm, factor_work_, 0);
    if (rank == 0)
      {
        factor_work_.clear();
        for (const auto &rows : gathered)
          factor_work_.insert(factor_work_.end(), rows.begin(), rows.end());
      }
  }

  bool Study::check_and_record_parameters(const ResultsStore &store, const RunOptions &options) const
  {
    // The file this run writes; earlier versions wrote the legacy name, which
    // is still read (ResultsStore::read_stored_parameters).
    const std::string stored_path = store.path(ResultsStore::parameters_file);
    const bool        had_file    = std::filesystem::exists(stored_path);
    // Records without their parameters cannot be continued: the model they
    // belong to is unknown, and a resume would label them with today's.
    if (options.resume && (!ResultsStore::stored_parameters_path(store.directory()).empty() ||
                           ResultsStore::holds_records(store.directory())))
      {
        auto before = flatten_parameters(ResultsStore::read_stored_parameters(store.directory()));
        // Earlier versions stored the grid as "a:h:b"; it means "a to b by h".
        if (const auto grid = before.find("study/energies"); grid != before.end())
          if (const auto words = energy_grid_in_words(grid->second))
            grid->second = *words;
        const auto now    = flatten_parameters(options.parameters_prm);
        std::string differ;
        for (const auto &[key, value] : now)
          if (key != "study/realisations" && key.rfind("analysis/", 0) != 0)
            {
              const auto it = before.find(key);
              if (it == before.end() || it->second != value)
                differ += "\n  " + key + ": stored '" +
                          (it == before.end() ? std::string("<absent>") : it->second) +
                          "', now '" + value + "'";
            }
        if (!differ.empty())
          throw InputError("option '--resume': the stored study in '" + store.directory() +
                           "' was run with other parameters; nothing was changed. Differences:" +
                           differ);
      }
    store.write_file(ResultsStore::parameters_file, options.parameters_prm);
    return !had_file;
  }

  void Study::postprocess(const ResultsStore &store, const RunOptions &options)
  {
    const StoredStudy stored = model_.describe_stored(store.directory(), options.parameters_prm);
    for (const auto &warning : write_study_tables(store.directory(), {stored}, analysis_))
      std::cerr << "alloyspec: warning: " << warning << '\n';
    std::set<std::uint64_t> realisations;
    for (const auto &r : stored.input.records)
      realisations.insert(r.realisation);
    const double volume = model_.domain_volumes(discretisations_.empty() ? nullptr :
                                                discretisations_.front().get()).first;

    // run.json: what was run, with what, how long, how big.
    rusage usage{};
    getrusage(RUSAGE_SELF, &usage);
    const UnitSystem       &units    = model_.units();
    Json manifest = manifest_header("run");
    manifest["seed"]                   = model_.study().seed;
    manifest["first_realisation"]      = model_.study().first_realisation;
    manifest["realisations_requested"] = model_.study().realisations;
    manifest["realisations_stored"]    = realisations.size();
    manifest["mpi_ranks"]              = dealii::Utilities::MPI::n_mpi_processes(MPI_COMM_WORLD);
    manifest["ranks_per_realisation"]  = teams_ ? teams_->size() : 1u;
    manifest["lattice"]                = model_.lattice().description();
    manifest["volume"]                 = json_number(volume);
    manifest["units"] = {{"system", units.is_physical() ? "physical" : "reduced"},
                         {"energy_unit", units.energy_label()},
                         {"length_unit", units.length_label()},
                         {"records_energy_unit_in_user_unit", json_number(units.solver_energy_unit())},
                         {"description", units.description()}};
    manifest["geometry"]  = model_.geometry().description();
    manifest["potential"] = model_.potential().description();
    {
      std::vector<std::pair<std::string, std::vector<double>>> logs;
      for (const auto bc : model_.boundaries())
        {
          auto &mine = logs.emplace_back(to_string(bc), std::vector<double>()).second;
          for (const auto &r : stored.input.records)
            if (r.boundary == to_string(bc))
              mine.push_back(r.log_weight);
        }
      manifest["sampling"] = sampling_manifest(model_.sampling(), tilt_log_, logs);
    }
    Json dofs = Json::object();
    for (std::size_t b = 0; b < model_.boundaries().size(); ++b)
      dofs[to_string(model_.boundaries()[b])] = discretisations_[b]->n_dofs();
    manifest["degrees_of_freedom"] = dofs;
    {
      // Which eigen-solver ran per boundary condition ("auto" resolved by the
      // number of unknowns), and how the stored lists were checked complete.
      Json used = Json::object();
      for (std::size_t b = 0; solver_ && b < model_.boundaries().size() && b < problems_.size(); ++b)
        used[to_string(model_.boundaries()[b])] = solver_->method_for(*problems_[b]);
      manifest["spectrum_solver"] = {
        {"setting", model_.solver().method},
        {"auto_crossover_unknowns", model_.solver().auto_crossover},
        {"inertia_check_limit_unknowns", model_.solver().inertia_limit},
        {"used", used}};
      std::size_t by_inertia = 0, by_enclosure = 0;
      for (const auto &r : stored.input.records)
        (r.verified_by == "enclosure" ? by_enclosure : by_inertia) += 1;
      manifest["lists_verified_by"] = {{"inertia", by_inertia}, {"enclosure", by_enclosure}};
      if (by_enclosure > 0)
        std::cout << "Note: " << by_enclosure << " of " << by_inertia + by_enclosure
                  << " eigenvalue lists were too large for an inertia count; their completeness "
                     "up to complete_up_to is the assumption of their enclosures "
                     "(realisations.csv: verified_by = enclosure)."
                  << std::endl;
    }
    const ErrorEstimateSettings estimate = model_.error_estimate();
    manifest["discretisation"]           = {
      {"degree", model_.discretisation().degree},
      {"elements_per_cell", model_.discretisation().elements_per_cell},
      {"error_estimate", estimate.method},
      {"accuracy_target", estimate.accuracy ? json_number(*estimate.accuracy) : Json()},
      {"accuracy_achieved",
       discretisation_choice_ ? json_number(discretisation_choice_->achieved) : Json()}};
    if (discretisation_choice_)
      {
        const DiscretisationChoice &c = *discretisation_choice_;
        Json candidates = Json::array();
        for (const PilotCandidate &k : c.candidates)
          candidates.push_back(
            {{"degree", k.settings.degree},
             {"elements_per_cell", k.settings.elements_per_cell},
             {"unknowns", k.study_box.dofs},
             {"estimated_memory_mib", json_number(k.study_box.bytes / 1048576.0)},
             {"largest_relative_error_bound", k.skipped.empty() ? json_number(k.bound) : Json()},
             {"not_solved_because", k.skipped.empty() ? Json() : Json(k.skipped)}});
        manifest["discretisation"]["accuracy_pilot"] = {
          {"pilot_cells", c.pilot_cells},
          {"pilot_boundary", "neumann"},
          {"pilot_eigenvalues", c.pilot_eigenvalues},
          {"energy_ceiling", json_number(model_.units().to_user_energy(c.energy_ceiling))},
          {"memory_budget_mib", json_number(c.budget_bytes / 1048576.0)},
          {"candidates", candidates}};
      }
    Json phases = Json::object();
    for (const auto &[name, seconds] : timings_)
      phases[name] = json_number(seconds);
    manifest["timings_seconds"]       = phases;
    manifest["memory_high_water_mib"] = json_number(usage.ru_maxrss / 1024.0);
    // User plus system CPU time of this process (rank 0): on a shared
    // machine, what "on one core" means for a one-rank run, whatever the load.
    manifest["cpu_seconds"] = json_number(double(usage.ru_utime.tv_sec) + 1e-6 * double(usage.ru_utime.tv_usec) +
                                          double(usage.ru_stime.tv_sec) + 1e-6 * double(usage.ru_stime.tv_usec));
    manifest["mesh"] = !discretisations_.empty() && discretisations_.front()->distributed() ?
                         "distributed" : "serial";
    // VmHWM of every rank: the largest baseline (before the mesh), the
    // largest high-water mark, and the largest difference of the two, which
    // is what a rank allocated for its part of the problem.
    manifest["memory_per_rank"] = {{"before_mesh_mib", json_number(memory_per_rank_[0])},
                                   {"high_water_mib", json_number(memory_per_rank_[1])},
                                   {"problem_mib", json_number(memory_per_rank_[2])}};
    manifest["factor_work"] = factor_work_json(factor_work_, factor_work_stride, model_.boundaries());
    manifest["parameters"] = options.parameters_json.empty() ? Json::object() :
                                                               Json::parse(options.parameters_json);
    write_json_file(store.directory(), "run.json", manifest);
  }
} // namespace alloyspec
