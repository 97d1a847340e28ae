/** @file eigen_solver.h  Lowest eigenpairs of K u = λ M u, verified by inertia counts. */
#pragma once

#include <cstddef>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  struct SpectralProblem;
  class InertiaCounter;
  class RealisationTeams;

  /** Subsection `spectrum` (solver part). */
  struct EigenSolverSettings
  {
    /** Lowest k eigenpairs wanted (ignored when an energy cutoff is set). */
    unsigned int          n_eigenvalues = 50;
    /** If set: all eigenvalues ≤ this energy. */
    std::optional<double> energy_cutoff;
    /** Relative convergence tolerance of the Krylov–Schur iteration. */
    double                tolerance = 1e-12;
    /**
     * "tuned", "baseline" (plain library defaults, for benchmarks),
     * "iterative" (LOBPCG with algebraic multigrid, lobpcg.h) or "auto"
     * (iterative from auto_crossover unknowns on, tuned below).
     */
    std::string           method = "tuned";
    /**
     * Largest number of unknowns at which an iterative list is checked by an
     * inertia count (a sparse LDLᵀ factor, memory growing like N^{4/3});
     * beyond it a list is verified by its enclosures only.
     */
    std::size_t           inertia_limit = 300000;
    /** Unknowns from which "auto" uses the iterative solver. */
    std::size_t           auto_crossover = 300000;
    /** Largest number of eigenpairs one solve may be asked for. */
    unsigned int          max_eigenvalues = 5000;

  };

  /**
   * What one eigen-solve cost in work on sparse factors, for the roofline of
   * the benchmark (tests/benchmarks/bench.py): the shift-and-invert solves
   * read the factor of @f$K - \sigma M@f$, at least @f$8\,n_L@f$ bytes
   * (@f$n_L@f$ = factor_entries, doubles) per forward sweep and again per
   * backward sweep, so with bandwidth β the solves take at least
   * @f$2 \cdot 8\,n_L \cdot \text{factor\_passes} / \beta@f$. Counted on
   * every solve: a few integer additions per block solve.
   */
  struct SolveWork
  {
    /** Entries in the shift-and-invert factor (MUMPS INFOG(29); 0 if none was made). */
    std::size_t factor_entries = 0;
    /** Forward-and-backward solve calls with that factor (one call may carry b right-hand sides). */
    std::size_t solve_calls = 0;
    /** Right-hand sides solved in all. */
    std::size_t solved_columns = 0;
    /**
     * Passes over the factor, each a forward and a backward sweep: a call
     * with b right-hand sides counts @f$\lceil b / B \rceil@f$, B the most
     * columns MUMPS treats in one pass (|ICNTL(27)|). A lower bound: MUMPS
     * may choose smaller blocks.
     */
    std::size_t factor_passes = 0;
    /** Numeric factorisations: the shift-and-invert ones and the inertia counts. */
    std::size_t numeric_factorisations = 0;
    /** Their floating-point operations (MUMPS RINFOG(3)), summed. */
    double      factorisation_flops = 0;
    /** Most right-hand sides MUMPS treats in one pass (|ICNTL(27)|; 1 on the single-vector path). */
    unsigned int rhs_block = 1;
    /**
     * Seconds inside the numeric factorisations and inside the solves with the
     * shift-and-invert factor (NaN on SLEPc's single-vector path, which does
     * not expose them); the rest of `seconds` is the Krylov method's own work.
     */
    double      factorisation_seconds = 0, factor_solve_seconds = 0;
    /** Wall time of EigenSolver::solve. */
    double      seconds = 0;
  };

  /** Eigenpairs of one problem, sorted ascending. */
  struct EigenResult
  {
    std::vector<double>              eigenvalues;
    /** @f$\|Ku-\lambda Mu\|_2 / (\max(|\lambda|,1)\,\|Mu\|_2)@f$ per pair. */
    std::vector<double>              residuals;
    /** DoF values, M-normalised. */
    std::vector<std::vector<double>> eigenvectors;
    /**
     * Every eigenvalue ≤ this energy is in the list: the inertia of
     * @f$K - E M@f$ at this E equals the list length (Sylvester's law of inertia).
     */
    double                           complete_up_to = 0;
    /** Number of negative pivots of @f$K - E M@f$ at complete_up_to. */
    std::size_t                      inertia_count = 0;
    unsigned int                     solver_iterations = 0;
    unsigned int                     attempts = 0;
    /** Factor work of this solve (on a team, of the whole team's distributed factor). */
    SolveWork                        work;
    /**
     * How the list was checked to be complete up to complete_up_to:
     * "inertia" (an inertia count was made) or "enclosure" (no count was made;
     * completeness is the assumption of the enclosures, eigen_enclosure.h).
     */
    std::string                      verified_by = "inertia";
    /**
     * Guaranteed intervals per eigenvalue (eigen_enclosure.h), empty when none
     * were computed. On an "inertia" list they hold without assumption; on an
     * "enclosure" list they rest on λ_{k+1} ≥ complete_up_to.
     */
    std::vector<double>              enclosure_lower, enclosure_upper;
    /** The method that made the list ("tuned", "baseline" or "iterative"; "auto" resolved). */
    std::string                      method;
  };

  /**
   * Shift-and-invert Krylov–Schur with a sparse LDLᵀ factorisation (MUMPS)
   * of @f$K - \sigma M@f$, σ below the spectrum (σ < min potential, so the
   * factorised matrix is positive definite). "baseline": SLEPc's
   * single-vector Krylov–Schur with fresh objects per solve. "tuned": the
   * block variant of block_krylov.h, whose multi-right-hand-side solves read
   * the factor once per block, with the MUMPS analysis kept across
   * realisations of one problem; for problems too small for a block basis,
   * and for the last retry, SLEPc's Krylov–Schur with kept objects and σ just
   * below the first verified list (LDLᵀ copes with an indefinite K − σM).
   *
   * After the solve, the list is cut at a gap E between two returned
   * eigenvalues (so a degenerate cluster is never split) and the number of
   * negative pivots of an LDLᵀ factorisation of @f$K - E M@f$, which by
   * Sylvester's law of inertia equals the number of eigenvalues below E, must
   * equal the number kept. Otherwise the solve is repeated with more vectors;
   * a persistent mismatch throws — a list is never silently short.
   */
  class EigenSolver
  {
  public:
    explicit EigenSolver(EigenSolverSettings settings);
    ~EigenSolver();
    EigenSolver(const EigenSolver &) = delete;
    EigenSolver &operator=(const EigenSolver &) = delete;

    EigenResult solve(const SpectralProblem &problem);

    /**
     * With teams of two or more ranks, solve() works on the team's
     * row-distributed copy of the problem (collective over the team; every
     * rank of it gets the same, whole eigenvectors). Not owned.
     */
    void use_teams(RealisationTeams *teams);

    /**
     * Bytes one rank may hold for an iterative solve (`--memory-budget`; 0:
     * no budget). Before each block iteration every rank compares a lower
     * estimate of its own need with it, and all ranks of the problem stop
     * with an InputError when one of them is over (a collective verdict).
     */
    void set_memory_budget(double bytes_per_rank) { memory_budget_ = bytes_per_rank; }

    /**
     * The method for @p problem: "auto" resolved by its number of unknowns
     * (the iterative path itself falls back to "tuned" for problems too small
     * for its block; EigenResult::method says what ran).
     */
    std::string method_for(const SpectralProblem &problem) const;


    const EigenSolverSettings &settings() const { return settings_; }

    /** The kept factorisation of K − σM for the block solver ("tuned"); defined in the .cc. */
    struct BlockFactor;

  private:
    /** The matrices worked on and their problem; defined in the .cc. */
    struct Pencil;
    EigenResult solve_pencil(const Pencil &pencil);
    /** The iterative path (iterative_solve.cc): LOBPCG with AMG, checked by inertia or by enclosures. */
    EigenResult solve_iterative(const Pencil &pencil);
    /**
     * Band-edge mode with one numeric factorisation: the factor of
     * @f$K - E_c M@f$ that counted the @p wanted eigenvalues below the
     * cutoff @f$E_c@f$ (by Sylvester's law of inertia, its negative pivots)
     * also drives shift-and-invert at @f$\sigma = E_c@f$. The operator
     * @f$(E_c M - K)^{-1} M@f$ has the eigenvalues @f$1/(E_c - \lambda)@f$,
     * positive exactly for @f$\lambda < E_c@f$, so the wanted pairs are its
     * @p wanted largest. The list is accepted only when the block solver
     * returns @p wanted pairs with M-orthonormal vectors whose Rayleigh
     * quotients all lie below @f$E_c@f$ by more than the cluster gap: then
     * list length = negative pivots at @f$E_c@f$, the same check as for a
     * cut between two returned eigenvalues, with @f$E_c@f$ as the cut.
     * std::nullopt when it is not accepted (or the factor has a zero pivot,
     * or the problem is too small for a block basis): the caller then runs
     * the usual path (shift below the spectrum, a second factorisation for
     * the check), so a refusal costs time, never strictness.
     */
    std::optional<EigenResult> solve_at_cut(const Pencil &pencil, std::size_t wanted);
    /** Inertia count for the list check: reuses one symbolic factorisation per problem ("tuned"). */
    std::size_t verified_count(const Pencil &pencil, double energy);
    /** Factor work of the solve in progress (reset by solve()). */
    SolveWork work_;

    /** Krylov–Schur objects and the first verified spectrum of one problem ("tuned"); defined in the .cc. */
    struct Workspace;

    EigenSolverSettings settings_;
    /** The method of the solve in progress ("auto" resolved by method_for()). */
    std::string         method_;
    RealisationTeams   *teams_ = nullptr;
    double              memory_budget_ = 0; ///< set_memory_budget()
    /** One workspace per problem: EPS/ST/KSP and the MUMPS analysis live across realisations. */
    std::map<const SpectralProblem *, std::unique_ptr<Workspace>> workspaces_;
    /**
     * One factor per problem ("tuned"): the block solver's shift-and-invert
     * factor and the list check's inertia count, one symbolic analysis for
     * both, kept across realisations.
     */
    std::map<const SpectralProblem *, std::unique_ptr<BlockFactor>> block_factors_;
    /** The iterative path's AMG hierarchy per problem; defined in iterative_solve.cc. */
    struct IterativeWorkspace;
    std::map<const SpectralProblem *, std::unique_ptr<IterativeWorkspace>> iterative_;
    /**
     * Problems in the order first solved, the same on every rank. Destroying
     * a distributed MUMPS factor is collective, so the kept objects are
     * destroyed in this order, not in the order of their keys (addresses,
     * which differ between ranks).
     */
    std::vector<const SpectralProblem *> first_solved_;
  };
} // namespace alloyspec
