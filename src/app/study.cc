#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/solver/landscape.h>
#include <alloyspec/core/interrupt.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/io/folder_lock.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>
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

    std::string json_escape(const std::string &s)
    {
      std::string out;
      for (const char c : s)
        {
          if (c == '"' || c == '\\')
            out += '\\';
          if (c == '\n')
            {
              out += "\\n";
              continue;
            }
          out += c;
        }
      return out;
    }

    std::string number(double x)
    {
      if (!std::isfinite(x))
        return "null";
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.17g", x);
      return buffer;
    }

    std::uint64_t parse_count(const std::string &text, const std::string &parameter,
                              std::uint64_t minimum, std::uint64_t maximum)
    {
      std::size_t        used  = 0;
      unsigned long long value = 0;
      try
        {
          if (text.find('-') == std::string::npos)
            value = std::stoull(text, &used);
        }
      catch (const std::exception &)
        {
          used = 0;
        }
      if (used == 0 || text.find_first_not_of(" \t", used) != std::string::npos ||
          value < minimum || value > maximum)
        throw InputError("parameter '" + parameter + "': '" + text +
                         "' is not allowed (an integer from " + std::to_string(minimum) +
                         " to " + std::to_string(maximum) + ")");
      return value;
    }

    constexpr std::uint64_t max_realisations = 4294967295ULL; // the stream counter holds 32 bits

    /**
     * Largest magnitude of a cell value in solver units. Rounding in the
     * factorisations of K - sigma M is about 2e-16 max|q| in absolute terms; at
     * 1e6 that is 2e-10, below the level spacing of any box that fits in
     * memory. Beyond it the shifted solves lose the spectrum (a potential of
     * 1e308 overflowed, 1e8 broke the fits), and physically a cell of 1e6
     * (decay e^-1000 across a unit cell) is already an impenetrable wall.
     * Common practice, no source.
     */
    constexpr double max_potential_magnitude = 1e6;

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

  } // namespace

  void StudySettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("study");
    prm.declare_entry("realisations", "20", dealii::Patterns::Anything(),
                      "Number of independent realisations of the random potential (1 to "
                      "4294967295).");
    prm.declare_entry("first realisation", "0", dealii::Patterns::Anything(),
                      "Index of the first realisation. Studies with the same seed and disjoint "
                      "ranges of realisations can be merged.");
    prm.declare_entry("seed", "1", dealii::Patterns::Anything(),
                      "Seed of the counter-based random stream (0 to 2^64-1). The value of cell n "
                      "in realisation r depends only on (seed, r, n).");
    prm.declare_entry("energies", "0 to 10 by 0.1", dealii::Patterns::Anything(),
                      "Energy grid of the IDS table, in the energy unit of the study: a range "
                      "'start to stop by step' (the stop is included when it lies on the grid), "
                      "or an ascending list 'E1, E2, ...'.");
    prm.declare_entry("export eigenfunctions", "",
                      dealii::Patterns::List(dealii::Patterns::Integer(0, 100000), 0, 100),
                      "Indices (0 = lowest) of eigenfunctions to write as VTU files "
                      "(eigenfunctions_r<realisation>_<boundary>.vtu, with the cell potential as a "
                      "cell field) for the realisations in 'export realisations'. Empty: none.");
    prm.declare_entry("export realisations", "0",
                      dealii::Patterns::List(dealii::Patterns::Integer(0), 0, 100),
                      "Realisations whose eigenfunctions are exported (see 'export eigenfunctions').");
    prm.leave_subsection();
    prm.enter_subsection("spectrum");
    prm.declare_entry("boundary conditions", "dirichlet, neumann",
                      dealii::Patterns::List(dealii::Patterns::Selection("dirichlet|neumann|periodic"), 1, 3),
                      "Boundary conditions to solve with, each on all faces of the box, with the "
                      "same cell values. Dirichlet and Neumann together bracket the "
                      "infinite-volume IDS from below and above.");
    prm.leave_subsection();
  }

  void StudySettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("study");
    realisations      = parse_count(prm.get("realisations"), "study/realisations", 1, max_realisations);
    first_realisation = parse_count(prm.get("first realisation"), "study/first realisation", 0,
                                    max_realisations - realisations);
    seed              = parse_count(prm.get("seed"), "study/seed", 0, ~0ULL);
    energies_text     = prm.get("energies");
    energies          = parse_energy_grid(energies_text, "study/energies");
    export_eigenfunctions.clear();
    for (const auto &x : dealii::Utilities::split_string_list(prm.get("export eigenfunctions")))
      export_eigenfunctions.push_back(
        static_cast<unsigned int>(parse_count(x, "study/export eigenfunctions", 0, 100000)));
    export_realisations.clear();
    for (const auto &x : dealii::Utilities::split_string_list(prm.get("export realisations")))
      export_realisations.push_back(
        parse_count(x, "study/export realisations", 0, max_realisations - 1));
    prm.leave_subsection();
    prm.enter_subsection("spectrum");
    boundaries.clear();
    for (const auto &name : dealii::Utilities::split_string_list(prm.get("boundary conditions")))
      {
        const Boundary bc = boundary_from_string(name, "spectrum/boundary conditions");
        if (std::find(boundaries.begin(), boundaries.end(), bc) != boundaries.end())
          throw InputError("parameter 'spectrum/boundary conditions': '" + name +
                           "' is listed twice (allowed: each of dirichlet, neumann, periodic once)");
        boundaries.push_back(bc);
      }
    prm.leave_subsection();
  }

  Study::Study()  = default;
  Study::~Study() = default;

  void Study::declare_parameters(dealii::ParameterHandler &prm)
  {
    Lattice::declare_parameters(prm);
    UnitSystem::declare_parameters(prm);
    GeometrySettings::declare_parameters(prm);
    LandscapeSettings::declare_parameters(prm);
    PotentialModel::declare_parameters(prm);
    DiscretisationSettings::declare_parameters(prm);
    ErrorEstimateSettings::declare_parameters(prm);
    EigenSolverSettings::declare_parameters(prm);
    StudySettings::declare_parameters(prm);
    SamplingSettings::declare_parameters(prm);
    AnalysisSettings::declare_parameters(prm);
  }

  void Study::parse_parameters(dealii::ParameterHandler &prm)
  {
    lattice_.parse_parameters(prm);
    units_.parse_parameters(prm, lattice_);
    geometry_.parse_parameters(prm, lattice_);
    potential_.parse_parameters(prm, lattice_);
    discretisation_settings_.parse_parameters(prm);
    error_settings_.parse_parameters(prm);
    if (error_settings_.accuracy && geometry_.has_mesh())
      throw InputError("parameter 'discretisation/accuracy': not available with 'lattice/mesh file' "
                       "(allowed there: empty; set the degree and refinements directly)");
    solver_settings_.parse_parameters(prm);
    // The cutoff is given in the user's energy unit, the solver works in its own.
    if (solver_settings_.energy_cutoff)
      solver_settings_.energy_cutoff = units_.to_solver_energy(*solver_settings_.energy_cutoff);
    study_.parse_parameters(prm);
    sampling_.parse_parameters(prm);
    if (sampling_.is_tilted())
      {
        if (!potential_.is_random())
          throw InputError("sampling/method = tilted needs a random law; potential/law = file "
                           "gives one fixed potential (use sampling/method = plain)");
        if (!sampling_.automatic)
          potential_.set_tilt(sampling_.tilt);
      }
    if (geometry_.has_mesh())
      for (const Boundary bc : study_.boundaries)
        if (bc == Boundary::periodic)
          throw InputError("parameter 'spectrum/boundary conditions': 'periodic' is not allowed "
                           "with 'lattice/mesh file' (allowed: dirichlet, neumann)");
    analysis_.parse_parameters(prm);
    // Checked here too, although only `landscape` uses them: a run accepts no
    // entry it has not checked.
    LandscapeSettings landscape;
    landscape.parse_parameters(prm);
    check_potential_scale();
  }

  void Study::check_potential_scale() const
  {
    double low = 0, high = 0;
    if (potential_.is_random())
      {
        const SingleSiteLaw &law = *potential_.law();
        low                      = law.support_min();
        high                     = law.support_max();
        if (!std::isfinite(low) || !std::isfinite(high))
          {
            // An untruncated gaussian: 8 standard deviations hold all but 1e-15.
            const double spread = 8.0 * std::sqrt(law.variance());
            low                 = law.mean() - spread;
            high                = law.mean() + spread;
          }
      }
    else
      {
        const std::vector<double> q = potential_.cell_values(study_.seed, 0);
        const auto [lo, hi]         = std::minmax_element(q.begin(), q.end());
        low                         = *lo;
        high                        = *hi;
      }
    const double magnitude =
      std::max(std::abs(units_.to_solver_energy(low)), std::abs(units_.to_solver_energy(high)));
    if (!(magnitude <= max_potential_magnitude))
      {
        std::ostringstream message;
        message << "subsection 'potential' (" << potential_.description()
                << "): the cell values reach " << low << " to " << high
                << ", allowed are magnitudes up to "
                << units_.to_user_energy(max_potential_magnitude) << " (" << max_potential_magnitude
                << " solver units); beyond that rounding in the factorisations swamps the level "
                   "spacings, and a cell that high is already an impenetrable wall";
        throw InputError(message.str());
      }
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
    const unsigned int dim = lattice_.dimension();
    const double       p   = discretisation_settings_.degree;
    const double       r   = discretisation_settings_.elements_per_cell;
    double elements = 1, dofs = 1;
    for (unsigned int d = 0; d < dim; ++d)
      {
        elements *= lattice_.cells()[d] * r;
        dofs *= lattice_.cells()[d] * r * p + 1;
      }
    const double row          = std::pow(2 * p + 1, double(dim));
    const double per_boundary = geometry_.has_mesh() ? 0.0 : 1024.0 * elements + 3 * 12.0 * dofs * row;
    const double k            = solver_settings_.energy_cutoff ? solver_settings_.max_eigenvalues :
                                                                 solver_settings_.n_eigenvalues;
    const double records = double(study_.realisations) * study_.boundaries.size() * k * 5 * 8;
    const double total   = per_boundary * study_.boundaries.size() + records;
    const double memory  = physical_memory_bytes();
    if (memory > 0 && total > memory)
      throw InputError("the study needs at least " + gibibytes(total) + " of memory (" +
                       gibibytes(per_boundary * study_.boundaries.size()) +
                       " for the meshes, matrices and factors of 'lattice/cells' = " +
                       lattice_.description() + ", " + gibibytes(records) + " for the eigenvalues of " +
                       std::to_string(study_.realisations) +
                       " realisations), more than this machine's " + gibibytes(memory) +
                       ": use fewer cells, a lower 'discretisation/degree', fewer "
                       "'study/realisations' (studies of disjoint realisations can be merged "
                       "by summarise) or fewer eigenvalues");
  }

  void Study::run(const RunOptions &options)
  {
    const bool root = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0;
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
    // A run refused before it stored anything leaves the folder as it found it.
    auto roll_back = [&] {
      if (!root || !store || stored_any_)
        return;
      std::error_code ignored;
      if (wrote_parameters)
        std::filesystem::remove(store->path(ResultsStore::parameters_file), ignored);
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
        if (error_settings_.accuracy)
          {
            ScopedTimer t(timings_, "pilot_choice");
            choose_for_accuracy(root);
          }
        // The labels users see (console, run.json) say what each phase produces.
        { ScopedTimer t(timings_, "mesh");         make_grid(); }
        { ScopedTimer t(timings_, "unknowns");     setup_system(); }
        { ScopedTimer t(timings_, "matrices");     assemble(); }
        if (sampling_.is_tilted() && sampling_.automatic)
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
                                  std::to_string(study_.realisations) +
                                  " realisations are stored in '" + store->directory() +
                                  "' and the tables were completed");
  }

  void Study::make_grid()
  {
    discretisations_.clear();
    for (const Boundary bc : study_.boundaries)
      {
        discretisations_.push_back(make_discretisation(bc));
        discretisations_.back()->make_grid();
      }
    if (dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0 && !discretisations_.empty())
      for (const auto &note : discretisations_.front()->notes())
        std::cerr << "alloyspec: warning: " << note << '\n';
  }

  std::unique_ptr<Discretisation> Study::make_discretisation(const Boundary bracketing) const
  {
    if (geometry_.has_mesh())
      return Discretisation::create_from_mesh(lattice_, discretisation_settings_,
                                              geometry_.mesh_file, geometry_.mesh_refinements,
                                              bracketing);
    return Discretisation::create(lattice_, discretisation_settings_,
                                  geometry_.conditions(bracketing, lattice_.dimension()));
  }

  std::vector<double> Study::solver_cell_values(const std::uint64_t realisation) const
  {
    return units_.to_solver_energies(potential_.cell_values(study_.seed, realisation));
  }

  std::pair<double, std::vector<double>> Study::domain_volumes() const
  {
    if (!geometry_.has_mesh())
      return {lattice_.volume(),
              std::vector<double>(lattice_.n_cells(),
                                  std::pow(lattice_.cell_size(), double(lattice_.dimension())))};
    if (!discretisations_.empty())
      return {discretisations_.front()->volume(), discretisations_.front()->cell_volumes()};
    // summarise: nothing was solved here; reading the mesh is cheap.
    auto d = make_discretisation(Boundary::neumann);
    d->make_grid();
    d->setup_system();
    return {d->volume(), d->cell_volumes()};
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
                           std::to_string(discretisation_settings_.degree) + " and " +
                           std::to_string(discretisation_settings_.elements_per_cell) +
                           " element(s) per cell, the " + to_string(study_.boundaries[b]) +
                           " problem on " + lattice_.description() +
                           " has no unknowns (every node lies on a constrained face); raise "
                           "'discretisation/degree' or 'discretisation/elements per cell'");
      }
    solver_ = std::make_unique<EigenSolver>(solver_settings_);
    solver_->use_teams(teams_.get());
    estimators_.clear();
    if (error_settings_.enabled())
      for (const Boundary bc : study_.boundaries)
        {
          // The richer space halves h: twice the elements per cell on a box,
          // one more refinement of a mesh file.
          const DiscretisationSettings fine =
            richer_settings(discretisation_settings_, RicherSpace::mesh);
          std::unique_ptr<Discretisation> d =
            geometry_.has_mesh() ?
              Discretisation::create_from_mesh(lattice_, discretisation_settings_,
                                               geometry_.mesh_file,
                                               geometry_.mesh_refinements + 1, bc) :
              Discretisation::create(lattice_, fine,
                                     geometry_.conditions(bc, lattice_.dimension()));
          estimators_.push_back(std::make_unique<ErrorEstimator>(
            std::move(d), discretisation_settings_, solver_settings_, RicherSpace::mesh));
        }
  }

  void Study::choose_for_accuracy(const bool root)
  {
    const Boundary bc = study_.boundaries.front();
    discretisation_choice_ = choose_discretisation(
      lattice_, discretisation_settings_, geometry_.conditions(bc, lattice_.dimension()),
      solver_settings_, solver_cell_values(study_.first_realisation), *error_settings_.accuracy);
    discretisation_settings_ = discretisation_choice_->settings;
    if (root)
      std::cout << "Pilot solve for 'discretisation/accuracy' = " << *error_settings_.accuracy
                << " (realisation " << study_.first_realisation << ", " << to_string(bc)
                << "):\n"
                << discretisation_choice_->log << "Chosen: degree " << discretisation_settings_.degree
                << ", elements per cell " << discretisation_settings_.elements_per_cell
                << (discretisation_choice_->met ? "" : " (target not met: the finest tried)")
                << std::endl;
  }

  RealisationRecord Study::solve_one(std::uint64_t realisation, std::size_t b)
  {
    const auto start = std::chrono::steady_clock::now();
    const std::vector<double> q = solver_cell_values(realisation);
    discretisations_[b]->assemble_potential(q, *problems_[b]);
    EigenResult result = solver_->solve(*problems_[b]);

    RealisationRecord record;
    record.realisation    = realisation;
    record.boundary       = to_string(study_.boundaries[b]);
    record.eigenvalues    = result.eigenvalues;
    record.residuals      = result.residuals;
    record.complete_up_to = result.complete_up_to;
    record.inertia_count  = result.inertia_count;
    record.potential_min  = *std::min_element(q.begin(), q.end());
    record.potential_max  = *std::max_element(q.begin(), q.end());
    record.attempts       = result.attempts;
    record.log_weight     = potential_.log_weight(potential_.cell_values(study_.seed, realisation));
    // The central cell (floor(L_i/2)) for the local-trace estimator.
    std::array<unsigned int, 3> centre{0, 0, 0};
    for (unsigned int d = 0; d < lattice_.dimension(); ++d)
      centre[d] = lattice_.cells()[d] / 2;
    const std::size_t central_cell = lattice_.cell_index(centre);
    discretisations_[b]->localisation_measures(result.eigenvectors, central_cell,
                                               record.inverse_participation_ratios,
                                               record.central_weights);
    if (!estimators_.empty())
      record.errors = estimators_[b]->errors(q, result.eigenvalues);
    export_eigenfunctions(realisation, b, q, result);
    write_eigenfunction_slices(realisation, b, result);
    record.solve_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    return record;
  }

  void Study::export_eigenfunctions(std::uint64_t realisation, std::size_t b,
                                    const std::vector<double> &q, const EigenResult &result) const
  {
    // One file per solve: only the rank that reports a team's realisation writes it.
    if ((teams_ && !teams_->leader()) || study_.export_eigenfunctions.empty() ||
        std::find(study_.export_realisations.begin(), study_.export_realisations.end(),
                  realisation) == study_.export_realisations.end())
      return;
    std::vector<std::string>         names;
    std::vector<std::vector<double>> fields;
    for (const unsigned int i : study_.export_eigenfunctions)
      if (i < result.eigenvectors.size())
        {
          char name[64];
          std::snprintf(name, sizeof name, "psi_%u_E=%.6g", i, result.eigenvalues[i]);
          names.emplace_back(name);
          fields.push_back(result.eigenvectors[i]);
        }
    const std::string file = "eigenfunctions_r" + std::to_string(realisation) + "_" +
                             to_string(study_.boundaries[b]) + ".vtu";
    discretisations_[b]->write_vtu(
      (std::filesystem::path(output_directory_) / file).string(), q, names, fields);
  }

  void Study::write_eigenfunction_slices(std::uint64_t realisation, std::size_t b,
                                         const EigenResult &result) const
  {
    // Maps for the report of a fixed potential: its first realisation only.
    const bool fixed = !potential_.is_random() || study_.realisations == 1;
    if (!fixed || realisation != study_.first_realisation || (teams_ && !teams_->leader()) ||
        result.eigenvectors.empty())
      return;
    const std::size_t count = std::min<std::size_t>(result.eigenvectors.size(), 4);
    std::vector<std::vector<std::array<double, 3>>> slices;
    for (std::size_t j = 0; j < count; ++j)
      slices.push_back(discretisations_[b]->slice_values(result.eigenvectors[j]));
    std::ostringstream csv;
    const std::string  unit = units_.is_physical() ? "_" + units_.length_label() : "";
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
                                "eigenfunction_slice_" + to_string(study_.boundaries[b]) + ".csv",
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
          if (n == study_.boundaries.size())
            done.insert(r);
      }
    std::vector<std::uint64_t> pending;
    for (std::uint64_t r = study_.first_realisation;
         r < study_.first_realisation + study_.realisations; ++r)
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
              study_.realisations - pending.size() + std::min(pending.size(), round * teams);
            throw Interrupted(signal, "stopped on " + signal_name(signal) + ": " +
                                        std::to_string(stored) + " of " +
                                        std::to_string(study_.realisations) +
                                        " realisations are stored in '" + store.directory() + "'");
          }
        const std::size_t slot = round * teams + teams_->index();
        std::string       eigen_text, summary_text;
        const auto [error, input_error] = capture_error([&] {
          if (slot < pending.size())
            for (std::size_t b = 0; b < study_.boundaries.size(); ++b)
              {
                progress.phase("solving realisation " + std::to_string(pending[slot]) + ", " +
                               to_string(study_.boundaries[b]));
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
  }

  StoredStudy Study::collect(const std::string &directory, const std::string &parameters_prm) const
  {
    StoredStudy stored;
    stored.directory  = directory;
    stored.parameters = flatten_parameters(parameters_prm);
    stored.seed       = study_.seed;
    AnalysisInput &in = stored.input;
    const auto [volume, cell_volumes] = domain_volumes();
    in.dimension      = lattice_.dimension();
    in.volume         = volume;
    in.cells          = lattice_.cells();
    in.cell_size      = lattice_.cell_size();
    for (const Boundary bc : study_.boundaries)
      in.boundaries.push_back(to_string(bc));
    in.energies        = study_.energies;
    in.band_bottom     = potential_.bottom();
    in.fixed_potential = !potential_.is_random();
    in.error_safety_factor = safety_factor;
    in.mean_potential  = potential_.is_random() ? potential_.law()->mean() : 0.0;
    in.model_summary   = "H = -Laplacian + V on " + lattice_.description() + "; " +
                       potential_.description() + "; FE_Q(" +
                       std::to_string(discretisation_settings_.degree) + ") with " +
                       std::to_string(discretisation_settings_.elements_per_cell) +
                       " elements per cell edge.";
    if (geometry_.has_mesh())
      in.model_summary += " Domain: " + geometry_.description() + " inside the lattice's box, "
                          "volume " + std::to_string(volume) + " (IDS per unit volume of the mesh).";
    else if (geometry_.any_periodic())
      in.model_summary += " Faces: " + geometry_.description() +
                          ", the listed boundary conditions on the other faces.";
    in.model_summary += " Units: " + units_.description() + ".";
    // Stored records are in solver units; everything analysed and shown is in the user's unit.
    if (units_.is_physical())
      {
        in.energy_unit        = "E (" + units_.energy_label() + ")";
        in.energy_column      = "energy_" + units_.energy_label();
        in.solver_energy_unit = units_.solver_energy_unit();
        // The reduced unit of the tables is the solver's (per nm², not per cell edge²).
        in.model_summary += " The energy_reduced columns and the stored records use the solver "
                            "unit hbar^2/(2 m* nm^2) = " +
                            short_number(units_.solver_energy_unit(), 6) + " " +
                            units_.energy_label() + ".";
      }
    in.parameters_text = parameters_prm;
    in.source_directory = directory;

    std::set<std::uint64_t> realisations;
    StoredRecords read = read_stored_records(directory);
    for (const auto &warning : read.warnings)
      std::cerr << "alloyspec: warning: " << warning << '\n';
    // A realisation counts only with every boundary condition stored: the
    // last summary lines of a round can be lost to a crash, and averaging
    // Dirichlet over more realisations than Neumann would skew the bracket.
    std::map<std::uint64_t, std::size_t> boundaries_stored;
    for (const auto &r : read.records)
      ++boundaries_stored[r.realisation];
    std::size_t incomplete = 0;
    for (const auto &[r, n] : boundaries_stored)
      incomplete += n != study_.boundaries.size();
    if (incomplete > 0)
      std::cerr << "alloyspec: warning: " << directory << ": " << incomplete
                << " realisation(s) lack a boundary condition (an interrupted run); they are "
                   "left out of the tables until the study is resumed\n";
    for (auto &r : read.records)
      if (boundaries_stored[r.realisation] == study_.boundaries.size() &&
          r.realisation >= study_.first_realisation &&
          r.realisation < study_.first_realisation + study_.realisations &&
          std::find_if(study_.boundaries.begin(), study_.boundaries.end(), [&](Boundary bc) {
            return to_string(bc) == r.boundary;
          }) != study_.boundaries.end())
        {
          realisations.insert(r.realisation);
          r.eigenvalues    = units_.to_user_energies(std::move(r.eigenvalues));
          // Bounds are differences of energies: the same factor, no offset.
          for (double &e : r.errors)
            e = units_.to_user_energy(e) - units_.to_user_energy(0.0);
          r.complete_up_to = units_.to_user_energy(r.complete_up_to);
          r.potential_min  = units_.to_user_energy(r.potential_min);
          r.potential_max  = units_.to_user_energy(r.potential_max);
          in.records.push_back(std::move(r));
        }
    if (realisations.empty())
      throw InputError("study folder '" + directory + "' holds no complete record of realisations " +
                       std::to_string(study_.first_realisation) + " to " +
                       std::to_string(study_.first_realisation + study_.realisations - 1) +
                       " (nothing to tabulate; resume the study to compute them)");
    if (!potential_.is_random())
      {
        const std::vector<double> q = potential_.cell_values(study_.seed, 0);
        in.mean_potential = std::accumulate(q.begin(), q.end(), 0.0) / q.size();
      }

    // Phase-space (semiclassical) count of the same realisations; the cell
    // values are regenerated from the counter-based stream, not stored. In
    // solver units (a density per unit volume does not depend on the energy
    // unit); each cell weighs with the volume of the domain that carries its
    // value (all alike in a box, the mesh's share otherwise).
    stored.semiclassical_sum.assign(study_.energies.size(), 0.0);
    PotentialModel potential = potential_;
    if (sampling_.is_tilted())
      potential.set_tilt(stored_tilt(directory));
    const std::vector<double> solver_energies = units_.to_solver_energies(study_.energies);
    for (const std::uint64_t r : realisations)
      {
        // Tilted sampling: the stored study's tilt, weighted like every other
        // average (w = 1 when plain).
        const std::vector<double> q_user = potential.cell_values(study_.seed, r);
        const std::vector<double> q      = units_.to_solver_energies(q_user);
        const double              w      = std::exp(potential.log_weight(q_user));
        for (std::size_t i = 0; i < study_.energies.size(); ++i)
          {
            double sum = 0;
            for (std::size_t n = 0; n < q.size(); ++n)
              if (cell_volumes[n] > 0)
                sum += cell_volumes[n] *
                       free_ids_density(lattice_.dimension(), solver_energies[i] - q[n]);
            stored.semiclassical_sum[i] += w * sum / volume;
          }
      }
    return stored;
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
    const StoredStudy stored = collect(store.directory(), options.parameters_prm);
    for (const auto &warning : write_study_tables(store.directory(), {stored}, analysis_))
      std::cerr << "alloyspec: warning: " << warning << '\n';
    std::set<std::uint64_t> realisations;
    for (const auto &r : stored.input.records)
      realisations.insert(r.realisation);
    const double volume = domain_volumes().first;

    // run.json: what was run, with what, how long, how big.
    rusage usage{};
    getrusage(RUSAGE_SELF, &usage);
    char host[256] = "unknown";
    gethostname(host, sizeof host - 1);
    std::ostringstream json;
    json << "{\n  \"program\": \"alloyspec\",\n  \"version\": \"" << ALLOYSPEC_VERSION << "\",\n"
         << "  \"seed\": " << study_.seed << ",\n"
         << "  \"first_realisation\": " << study_.first_realisation << ",\n"
         << "  \"realisations_requested\": " << study_.realisations << ",\n"
         << "  \"realisations_stored\": " << realisations.size() << ",\n"
         << "  \"mpi_ranks\": " << dealii::Utilities::MPI::n_mpi_processes(MPI_COMM_WORLD) << ",\n"
         << "  \"ranks_per_realisation\": " << (teams_ ? teams_->size() : 1u) << ",\n"
         << "  \"host\": \"" << json_escape(host) << "\",\n"
         << "  \"lattice\": \"" << json_escape(lattice_.description()) << "\",\n"
         << "  \"volume\": " << number(volume) << ",\n"
         << "  \"units\": {\"system\": \"" << (units_.is_physical() ? "physical" : "reduced")
         << "\", \"energy_unit\": \"" << units_.energy_label()
         << "\", \"length_unit\": \"" << units_.length_label()
         << "\", \"records_energy_unit_in_user_unit\": " << number(units_.solver_energy_unit())
         << ", \"description\": \"" << json_escape(units_.description()) << "\"},\n"
         << "  \"geometry\": \"" << json_escape(geometry_.description()) << "\",\n"
         << "  \"potential\": \"" << json_escape(potential_.description()) << "\",\n"
         << "  \"sampling\": {\"method\": \"" << sampling_.method_name() << "\", \"tilt\": "
         << number(sampling_.is_tilted() ? sampling_.tilt : 0.0) << ", \"tilt_choice\": \""
         << (sampling_.is_tilted() ? (sampling_.automatic ? "auto" : "given") : "none")
         << "\", \"target_energy\": "
         << (sampling_.target_energy ? number(*sampling_.target_energy) : "null")
         << ", \"pilot\": \"" << json_escape(tilt_log_) << "\"},\n"
         << "  \"degrees_of_freedom\": {";
    for (std::size_t b = 0; b < study_.boundaries.size(); ++b)
      json << (b ? ", " : "") << '"' << to_string(study_.boundaries[b])
           << "\": " << discretisations_[b]->n_dofs();
    json << "},\n  \"discretisation\": {\"degree\": " << discretisation_settings_.degree
         << ", \"elements_per_cell\": " << discretisation_settings_.elements_per_cell
         << ", \"error_estimate\": \"" << error_settings_.method << "\", \"accuracy_target\": "
         << (error_settings_.accuracy ? number(*error_settings_.accuracy) : "null")
         << ", \"accuracy_achieved\": "
         << (discretisation_choice_ ? number(discretisation_choice_->achieved) : "null");
    json << "},\n  \"timings_seconds\": {";
    bool first = true;
    for (const auto &[name, seconds] : timings_)
      {
        json << (first ? "" : ", ") << '"' << name << "\": " << number(seconds);
        first = false;
      }
    json << "},\n  \"memory_high_water_mib\": " << number(usage.ru_maxrss / 1024.0) << ",\n"
         << "  \"note\": \"Model estimates for the stated model and box; not measurements.\",\n"
         << "  \"parameters\": " << (options.parameters_json.empty() ? "{}" : options.parameters_json)
         << "\n}\n";
    store.write_file("run.json", json.str());
  }
} // namespace alloyspec
