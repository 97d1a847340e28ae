#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/interrupt.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/app/study.h>
#include <alloyspec/solver/team.h>
#include <alloyspec/analysis/summary.h>
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
    /** Adds the wall time of its scope to one entry of a timing table. */
    class ScopedTimer
    {
    public:
      ScopedTimer(std::map<std::string, double> &table, std::string name)
        : table_(table)
        , name_(std::move(name))
        , start_(std::chrono::steady_clock::now())
      {}
      ~ScopedTimer()
      {
        table_[name_] +=
          std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
      }

    private:
      std::map<std::string, double>        &table_;
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


  } // namespace

  Study::Study()  = default;
  Study::~Study() = default;

  void Study::declare_parameters(dealii::ParameterHandler &prm) { declare_all_parameters(prm); }

  void Study::parse_parameters(dealii::ParameterHandler &prm)
  {
    model_.parse_parameters(prm);
    analysis_.parse_parameters(prm);
  }

  void Study::run(const RunOptions &options)
  {
    const bool   root = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0;
    // Checked before anything is written (the same verdict on every rank).
    teams_ = std::make_unique<RealisationTeams>(options.ranks_per_realisation);
    // SIGINT/SIGTERM from here on finish the running realisation first.
    std::optional<InterruptGuard> interrupt_guard(std::in_place);
    ResultsStore store(options.output_directory, options.resume);
    output_directory_ = options.output_directory;
    // Only rank 0 writes; every rank must learn if it refused (else the others hang).
    const auto [error, input_error] = capture_error([&] {
      if (root)
        check_and_record_parameters(store, options);
    });
    throw_if_any_failed(MPI_COMM_WORLD, error, input_error);
    if (model_.error_estimate().accuracy)
      {
        ScopedTimer t(timings_, "choose_discretisation");
        choose_for_accuracy(root);
      }
    { ScopedTimer t(timings_, "make_grid");    make_grid(); }
    { ScopedTimer t(timings_, "setup_system"); setup_system(); }
    { ScopedTimer t(timings_, "assemble");     assemble(); }
    { ScopedTimer t(timings_, "solve");        solve(store, options); }
    // The guard stays up: a stop request that arrives once every realisation
    // is stored lets the (quick) tables be written and the run end normally,
    // rather than die half-way through them; a second signal still ends it.
    if (root)
      {
        ScopedTimer t(timings_, "postprocess");
        postprocess(store, options);
      }
  }

  void Study::make_grid()
  {
    discretisations_.clear();
    for (const Boundary bc : model_.boundaries())
      {
        discretisations_.push_back(model_.make_discretisation(bc));
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
    for (auto &d : discretisations_)
      {
        d->assemble_fixed();
        problems_.push_back(d->make_problem());
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

  void Study::choose_for_accuracy(const bool root)
  {
    const Boundary bc = model_.boundaries().front();
    discretisation_choice_ = choose_discretisation(
      model_.lattice(), model_.discretisation(), model_.geometry().conditions(bc, model_.lattice().dimension()),
      model_.solver(), model_.solver_cell_values(model_.study().first_realisation), *model_.error_estimate().accuracy);
    model_.set_discretisation(discretisation_choice_->settings);
    if (root)
      std::cout << "Pilot solve for 'discretisation/accuracy' = " << *model_.error_estimate().accuracy
                << " (realisation " << model_.study().first_realisation << ", " << to_string(bc)
                << "):\n"
                << discretisation_choice_->log << "Chosen: degree " << model_.discretisation().degree
                << ", elements per cell " << model_.discretisation().elements_per_cell
                << (discretisation_choice_->met ? "" : " (target not met: the finest tried)")
                << std::endl;
  }

  RealisationRecord Study::solve_one(std::uint64_t realisation, std::size_t b)
  {
    const auto start = std::chrono::steady_clock::now();
    const std::vector<double> q = model_.solver_cell_values(realisation);
    discretisations_[b]->assemble_potential(q, *problems_[b]);
    EigenResult result = solver_->solve(*problems_[b]);

    RealisationRecord record;
    record.realisation    = realisation;
    record.boundary       = to_string(model_.boundaries()[b]);
    record.eigenvalues    = result.eigenvalues;
    record.residuals      = result.residuals;
    record.complete_up_to = result.complete_up_to;
    record.inertia_count  = result.inertia_count;
    record.potential_min  = *std::min_element(q.begin(), q.end());
    record.potential_max  = *std::max_element(q.begin(), q.end());
    record.attempts       = result.attempts;
    // The central cell (floor(L_i/2)) for the local-trace estimator.
    std::array<unsigned int, 3> centre{0, 0, 0};
    for (unsigned int d = 0; d < model_.lattice().dimension(); ++d)
      centre[d] = model_.lattice().cells()[d] / 2;
    const std::size_t central_cell = model_.lattice().cell_index(centre);
    discretisations_[b]->localisation_measures(result.eigenvectors, central_cell,
                                               record.inverse_participation_ratios,
                                               record.central_weights);
    if (!estimators_.empty())
      record.errors = estimators_[b]->errors(q, result.eigenvalues);
    export_eigenfunctions(realisation, b, q, result);
    record.solve_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
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
        for (const auto &r : ResultsStore::read(store.directory()))
          ++stored[r.realisation];
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
                const RealisationRecord record = solve_one(pending[slot], b);
                if (!teams_->leader())
                  continue;
                eigen_text += record.eigenvalue_lines();
                summary_text += record.summary_line();
                ++solved_here_;
              }
        });
        // Rank 0 owns the files; it appends every finished realisation of
        // this round before any rank starts the next one.
        const auto eigen_all   = dealii::Utilities::MPI::gather(comm, eigen_text, 0);
        const auto summary_all = dealii::Utilities::MPI::gather(comm, summary_text, 0);
        if (rank == 0)
          {
            for (unsigned int p = 0; p < ranks; ++p)
              if (!summary_all[p].empty())
                store.append_text(eigen_all[p], summary_all[p]);
            progress.update(std::min(pending.size(), (round + 1) * teams));
          }
        // After storing what the other ranks finished.
        throw_if_any_failed(comm, error, input_error);
      }
    progress.finish();
  }

  void Study::check_and_record_parameters(const ResultsStore &store, const RunOptions &options) const
  {
    const std::string stored_path = store.path("parameters.prm");
    if (options.resume && std::filesystem::exists(stored_path))
      {
        std::ifstream      in(stored_path);
        std::ostringstream text;
        text << in.rdbuf();
        const auto before = flatten_parameters(text.str());
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
    store.write_file("parameters.prm", options.parameters_prm);
  }

  void Study::postprocess(const ResultsStore &store, const RunOptions &options)
  {
    const StoredStudy stored = model_.describe_stored(store.directory(), options.parameters_prm);
    for (const auto &warning : write_study_tables(store.directory(), {stored}, analysis_))
      std::cerr << "alloyspec: warning: " << warning << '\n';
    std::set<std::uint64_t> realisations;
    for (const auto &r : stored.input.records)
      realisations.insert(r.realisation);
    const double volume = model_.domain_volumes(discretisations_.empty() ? nullptr : discretisations_.front().get()).first;

    // run.json: what was run, with what, how long, how big.
    rusage usage{};
    getrusage(RUSAGE_SELF, &usage);
    char host[256] = "unknown";
    gethostname(host, sizeof host - 1);
    std::ostringstream json;
    json << "{\n  \"program\": \"alloyspec\",\n  \"version\": \"" << ALLOYSPEC_VERSION << "\",\n"
         << "  \"seed\": " << model_.study().seed << ",\n"
         << "  \"first_realisation\": " << model_.study().first_realisation << ",\n"
         << "  \"realisations_requested\": " << model_.study().realisations << ",\n"
         << "  \"realisations_stored\": " << realisations.size() << ",\n"
         << "  \"mpi_ranks\": " << dealii::Utilities::MPI::n_mpi_processes(MPI_COMM_WORLD) << ",\n"
         << "  \"ranks_per_realisation\": " << (teams_ ? teams_->size() : 1u) << ",\n"
         << "  \"host\": \"" << json_escape(host) << "\",\n"
         << "  \"lattice\": \"" << json_escape(model_.lattice().description()) << "\",\n"
         << "  \"volume\": " << number(volume) << ",\n"
         << "  \"units\": {\"system\": \"" << (model_.units().is_physical() ? "physical" : "reduced")
         << "\", \"energy_unit\": \"" << model_.units().energy_label()
         << "\", \"length_unit\": \"" << model_.units().length_label()
         << "\", \"records_energy_unit_in_user_unit\": " << number(model_.units().solver_energy_unit())
         << ", \"description\": \"" << json_escape(model_.units().description()) << "\"},\n"
         << "  \"geometry\": \"" << json_escape(model_.geometry().description()) << "\",\n"
         << "  \"potential\": \"" << json_escape(model_.potential().description()) << "\",\n"
         << "  \"degrees_of_freedom\": {";
    for (std::size_t b = 0; b < model_.boundaries().size(); ++b)
      json << (b ? ", " : "") << '"' << to_string(model_.boundaries()[b])
           << "\": " << discretisations_[b]->n_dofs();
    json << "},\n  \"discretisation\": {\"degree\": " << model_.discretisation().degree
         << ", \"elements_per_cell\": " << model_.discretisation().elements_per_cell
         << ", \"error_estimate\": \"" << model_.error_estimate().method << "\", \"accuracy_target\": "
         << (model_.error_estimate().accuracy ? number(*model_.error_estimate().accuracy) : "null")
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
