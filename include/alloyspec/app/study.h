/** @file study.h  A study: many realisations, several boundary conditions, the averaged IDS. */
#pragma once

#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/solver/discretisation_pilot.h>
#include <alloyspec/solver/error_estimate.h>

#include <cstdint>
#include <map>
#include <array>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  class ResultsStore;
  class RealisationTeams;
  struct RealisationRecord;
  struct StoredStudy;

  /** How to run (command-line side, not science). */
  struct RunOptions
  {
    std::string output_directory;
    bool        resume   = false;
    bool        progress = false;
    /**
     * MPI ranks that solve one realisation together (a divisor of the
     * number of ranks): the factorisation and the Krylov iteration are
     * distributed over them (team.h). 1: every rank solves its own.
     */
    unsigned int ranks_per_realisation = 1;
    /**
     * `--memory-budget`: bytes one rank may use for the solve that
     * `discretisation/accuracy` chooses (0: default_memory_budget()), and
     * that each rank checks before every block iteration of the iterative
     * solver (0: not checked; EigenSolver::set_memory_budget).
     */
    double memory_budget_bytes = 0;
    /** Effective parameters as JSON, copied into run.json. */
    std::string parameters_json;
    /** Effective parameters in deal.II's short format, stored as ResultsStore::parameters_file. */
    std::string parameters_prm;
  };

  /**
   * The main job: for realisations r = first, …, first + n − 1 draw the cell
   * values @f$q_n(\omega_r)@f$, solve for the lowest eigenvalues of
   * @f$H_\omega = -\Delta + V_\omega@f$ under each boundary condition with the
   * same values (common random numbers tighten the bracket), store every
   * record durably, and average the counting functions
   * @f$N^X_L(E) = \#\{\lambda_j \le E\}/|\Lambda|@f$ into ids.csv, whose
   * Dirichlet and Neumann columns bracket the infinite-volume IDS:
   * @f$E[N^D_L] \le N \le E[N^N_L]@f$ (Kirsch & Martinelli 1982).
   *
   * Realisations are dealt out to teams of MPI ranks in rounds (a team is
   * one rank unless RunOptions::ranks_per_realisation says otherwise); every
   * number depends on (seed, realisation, cell) only, so the results do not
   * depend on the number of ranks, up to rounding in a team's distributed sums.
   */
  class Study
  {
  public:
    Study();
    ~Study();

    /** Declares every parameter of every subsection. */
    static void declare_parameters(dealii::ParameterHandler &prm);
    void        parse_parameters(dealii::ParameterHandler &prm);

    /**
     * make_grid, setup_system, assemble, solve, postprocess — each timed, and
     * reported under the labels of phase_timings().
     */
    void run(const RunOptions &options);

    /** Seconds per phase in the order run: (label, seconds). */
    using PhaseTimings = std::vector<std::pair<std::string, double>>;
    /**
     * Labels: pilot_choice (degree and mesh for an accuracy target), mesh,
     * unknowns (degrees of freedom and sparsity), matrices (the fixed K and M),
     * tilt_search (the automatic tilt of tilted sampling),
     * eigen_solves (all realisations), tables (tables, figures, report).
     */
    const PhaseTimings &phase_timings() const { return timings_; }
    const AnalysisSettings              &analysis_settings() const { return analysis_; }
    /** True when realisations are drawn from a tilted law (sampling.h). */
    bool                                 tilted() const { return model_.tilted(); }
    /** The parsed model (for commands that reuse a study's set-up). */
    const StudyModel                    &model() const { return model_; }


  private:
    void make_grid();
    void setup_system();
    void assemble();
    void solve(const ResultsStore &store, const RunOptions &options);
    void postprocess(const ResultsStore &store, const RunOptions &options);
    /**
     * Stores ResultsStore::parameters_file (read under either name); on resume, refuses other model parameters than
     * stored, and a folder whose records have lost their parameter file.
     * Returns true if the file did not exist before.
     */
    bool check_and_record_parameters(const ResultsStore &store, const RunOptions &options) const;

    /** InputError, with the estimate, if the study certainly cannot fit in this machine's memory. */
    void check_memory() const;
    /**
     * `sampling/tilt = auto`: the cross-entropy method (tilt_choice.h) on
     * pilot realisations of the first boundary condition, scored by their
     * lowest eigenvalue, with the level lowered towards `sampling/target
     * energy` step by step (multilevel CE). The pilot's realisations are
     * numbered from 2^48 on, so they are never part of the sample. The choice
     * is stored in `tilt.txt`, which a resumed run reuses.
     */
    void choose_tilt(const ResultsStore &store, const RunOptions &options, bool root);

    /**
     * Pilot for `discretisation/accuracy` (choose_discretisation()): sets
     * degree and elements per cell, within @p budget_bytes per rank.
     */
    void choose_for_accuracy(bool root, double budget_bytes);

    /**
     * Half the machine's physical memory, shared by the ranks on this node:
     * room for the operating system, the other ranks and the tables, and a
     * margin on the memory model (common practice, no source).
     */
    static double default_memory_budget();

    /** Writes the requested eigenfunctions of one solve as VTU (see StudySettings). */
    void export_eigenfunctions(std::uint64_t realisation, std::size_t boundary_index,
                               const std::vector<double> &cell_values, const EigenResult &result) const;
    RealisationRecord solve_one(std::uint64_t realisation, std::size_t boundary_index);
    /**
     * For a fixed potential: the lowest four eigenfunctions on a line (1D), the
     * domain (2D) or the mid-plane (3D), as eigenfunction_slice_<bc>.csv.
     */
    void write_eigenfunction_slices(std::uint64_t realisation, std::size_t boundary_index,
                                    const EigenResult &result) const;

    StudyModel             model_;
    /** Set when `discretisation/accuracy` chose degree and elements per cell. */
    std::optional<DiscretisationChoice> discretisation_choice_;
    AnalysisSettings       analysis_;

    std::vector<std::unique_ptr<Discretisation>>  discretisations_;
    std::vector<std::unique_ptr<SpectralProblem>> problems_;
    /** Teams of ranks that share a realisation (made by run()). */
    std::unique_ptr<RealisationTeams>             teams_;
    std::unique_ptr<EigenSolver>                  solver_;
    std::vector<std::unique_ptr<ErrorEstimator>>  estimators_; ///< per boundary, if estimating
    PhaseTimings                                  timings_;
    std::size_t                                   solved_here_ = 0;
    /** Rank 0: a record of this run reached the folder (a failure then keeps the folder). */
    bool                                          stored_any_ = false;
    /** Rank 0: this run wrote StudyModel::tilt_file (removed again if the run stores nothing). */
    bool                                          wrote_tilt_ = false;
    std::string                                   output_directory_;
    /** What the automatic tilt choice did, for run.json. */
    std::string                                   tilt_log_;
    /**
     * Factor work per realisation solved here (EigenResult::work), flattened
     * in rows of factor_work_stride: boundary index, realisation, factor
     * entries, solve calls, columns, factor passes, numeric factorisations,
     * their operations, eigen-solver seconds, realisation seconds, MUMPS's
     * right-hand-side block, factorisation seconds, factor-solve seconds. After
     * solve(), rank 0 holds every rank's rows.
     */
    std::vector<double>                           factor_work_;
    static constexpr std::size_t                  factor_work_stride = 13;
    /** This rank's VmHWM (MiB) when make_grid() began. */
    double                                        memory_before_mesh_mib_ = 0;
    /** After solve(), over all ranks: largest baseline, high-water mark, and their difference (MiB). */
    std::array<double, 3>                         memory_per_rank_{{0, 0, 0}};
  };
} // namespace alloyspec
