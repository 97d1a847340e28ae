/** @file error_estimate.h  Per-eigenvalue discretisation error from a solve on a richer space. */
#pragma once

#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/model/lattice.h>

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

  /** How the richer space of the second solve is built. */
  enum class RicherSpace
  {
    degree, ///< FE_Q(p+1) on the same mesh
    mesh    ///< FE_Q(p) with 2r elements per cell edge
  };

  /**
   * Entries `error estimate` and `accuracy` of subsection `discretisation`.
   */
  struct ErrorEstimateSettings
  {
    /** "none" or "richardson". */
    std::string           method = "none";
    /** Relative target for @f$\max_i \mathrm{err}_i/\max(|\lambda_i|,1)@f$; empty: keep degree and r. */
    std::optional<double> accuracy;

    bool enabled() const { return method == "richardson"; }

    ErrorEstimateSettings() = default;
    /** The entries `error estimate` and `accuracy` of subsection `discretisation`. */
    explicit ErrorEstimateSettings(const DiscretisationSettings &settings);
  };

  /**
   * Turns coarse and fine eigenvalues of the same operator into error bounds
   * for the coarse ones, matched by index over the first min(n_c, n_f).
   *
   * Both lists come from Rayleigh–Ritz on nested conforming spaces, so
   * @f$\lambda_i \le \lambda_i^{f} \le \lambda_i^{c}@f$ (min-max principle) and
   * @f$\lambda^c_i - \lambda^f_i = e_c - e_f@f$ with @f$e = \lambda_h - \lambda \ge 0@f$.
   * - mesh (h → h/2, Q_p): @f$e \approx C h^{2p}@f$ gives the Richardson estimate
   *   @f$e_c \approx (\lambda^c - \lambda^f)\,4^p/(4^p-1)@f$;
   * - degree (p → p+1, same h): @f$e_c = (\lambda^c-\lambda^f) + e_f@f$ with
   *   @f$e_f \ll e_c@f$ once resolved, so the difference itself is the estimate.
   *
   * The reported bound is @ref safety_factor times the estimate: with two
   * spaces the ratio @f$e_f/e_c@f$ is not observed, and pre-asymptotic modes
   * have it nearer 1 than the asymptotic law says; the factor 3 for two-grid
   * studies is Roache's grid convergence index (P. J. Roache, J. Fluids Eng.
   * 116 (1994) 405–413). A difference below rounding (both solves carry
   * relative error ~@f$10^{-12}@f$, the solver tolerance) is reported as that
   * rounding floor, so a bound is never 0.
   */
  std::vector<double> eigenvalue_error_bounds(const std::vector<double> &coarse,
                                              const std::vector<double> &fine,
                                              RicherSpace space, unsigned int degree,
                                              double solver_tolerance);

  /** Safety factor of eigenvalue_error_bounds() (Roache 1994, two grids). */
  constexpr double safety_factor = 3.0;

  /**
   * The second solve of every realisation: owns the richer discretisation of
   * one box and boundary condition, its matrices and its solver.
   */
  class ErrorEstimator
  {
  public:
    /** The box of @p lattice with @p bcs, on the space richer than @p coarse. */
    ErrorEstimator(const Lattice &lattice, const DiscretisationSettings &coarse,
                   const BoundaryConditions &bcs, const EigenSolverSettings &solver,
                   RicherSpace space);
    /**
     * Any domain: @p fine must be made with richer_settings(coarse, space) and
     * not yet set up (this constructor builds and assembles it).
     */
    ErrorEstimator(std::unique_ptr<Discretisation> fine, const DiscretisationSettings &coarse,
                   const EigenSolverSettings &solver, RicherSpace space);
    ~ErrorEstimator();
    ErrorEstimator(const ErrorEstimator &) = delete;
    ErrorEstimator &operator=(const ErrorEstimator &) = delete;

    /**
     * Error bounds for @p coarse (eigenvalues of the same realisation @p cell_values
     * on the coarse space): solves for as many fine eigenvalues; entries past the
     * verified common range are NaN.
     */
    std::vector<double> errors(const std::vector<double> &cell_values,
                               const std::vector<double> &coarse);

    /** The fine eigenvalues of the last call. */
    const std::vector<double> &fine_eigenvalues() const { return fine_; }
    std::size_t                n_dofs() const;

    /**
     * Richer space used by the study: the mesh halved. FE_Q(p+1) on the same mesh is
     * cheaper but blind to modes symmetric about every element centre: an even p and
     * p+1 then give nearly the same eigenvalue (measured: free 2x2x1 box, mode 8, Q2
     * and Q3 differ by 0.002 while the Q2 error is 0.52).
     */
    static RicherSpace default_space() { return RicherSpace::mesh; }

  private:
    unsigned int                     degree_;
    RicherSpace                      space_;
    EigenSolverSettings              solver_settings_;
    std::unique_ptr<Discretisation>  discretisation_;
    std::unique_ptr<SpectralProblem> problem_;
    std::vector<double>              fine_;
  };

  /** Degree p+1 (RicherSpace::degree) or 2r elements per cell (RicherSpace::mesh). */
  DiscretisationSettings richer_settings(const DiscretisationSettings &coarse, RicherSpace space);

} // namespace alloyspec
