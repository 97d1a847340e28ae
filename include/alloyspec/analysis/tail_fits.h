/**
 * @file tail_fits.h  Weighted least-squares fits: finite-size extrapolation of
 * the IDS in 1/L, the Lifshitz exponent at the bottom of the spectrum and the
 * Urbach energy of the band tail.
 */
#pragma once

#include <cstddef>
#include <limits>
#include <string>
#include <vector>

namespace alloyspec
{
  /** Standard normal quantile @f$\Phi^{-1}(p)@f$, 0 < p < 1 (bisection on erfc; |error| < 1e-12). */
  double normal_quantile(double p);

  /**
   * Quantile of Student's t distribution with @p dof ≥ 1 degrees of freedom,
   * by bisection on the closed-form distribution function for integer degrees
   * of freedom (Abramowitz & Stegun, Handbook of Mathematical Functions,
   * 26.7.3–26.7.4).
   */
  double student_t_quantile(double p, unsigned int dof);

  /** Result of a linear weighted least-squares fit. */
  struct LinearFit
  {
    std::vector<double>              parameters;
    std::vector<std::vector<double>> covariance; ///< from the given σ_i (not rescaled)
    double                           chi_squared = 0;
    std::size_t                      dof         = 0; ///< points − parameters
  };

  /**
   * Minimises @f$\chi^2 = \sum_i (y_i - \sum_k X_{ik}\beta_k)^2/\sigma_i^2@f$.
   * The covariance of @f$\hat\beta@f$ is @f$(X^T W X)^{-1}@f$, W = diag(σ⁻²),
   * valid when the σ_i are the true, independent errors. Throws
   * std::invalid_argument when σ_i ≤ 0, fewer points than parameters, or the
   * design is singular.
   */
  LinearFit weighted_least_squares(const std::vector<std::vector<double>> &design,
                                   const std::vector<double> &y, const std::vector<double> &sigma);

  /**
   * Finite-size extrapolation @f$N_L = N_\infty + c/L \;(+\, d/L^2)@f$ of data
   * (L_i, mean_i, stderr_i) from independent studies, by weighted least
   * squares. The 1/L term is the surface term of Dirichlet–Neumann bracketing
   * (Kirsch & Martinelli 1982); 1/L² takes edges into account.
   */
  struct Extrapolation
  {
    double      n_infinity = 0, n_infinity_error = 0;
    double      c = 0, c_error = 0;
    double      d = 0, d_error = 0; ///< 0 unless quadratic
    bool        quadratic   = false;
    double      chi_squared = 0;
    std::size_t dof         = 0;
  };

  Extrapolation extrapolate_in_inverse_size(const std::vector<double> &sizes,
                                            const std::vector<double> &means,
                                            const std::vector<double> &errors,
                                            bool quadratic = false);

  /**
   * Whether two extrapolated limits agree: @f$|N_a - N_b| \le z\sqrt{\sigma_a^2+\sigma_b^2}@f$
   * with z the two-sided normal quantile of @p confidence. Dirichlet and
   * Neumann studies with the same cell values are positively correlated, which
   * makes this test conservative (it treats them as independent).
   */
  bool extrapolations_agree(const Extrapolation &a, const Extrapolation &b, double confidence);

  /** One IDS or DOS value on the grid, as fits take it. */
  struct GridValue
  {
    double      energy;
    double      mean;
    double      standard_error;
    bool        complete;
    std::size_t states_below = 0;             ///< eigenvalues ≤ energy, all realisations
    std::size_t realisations_with_states = 0; ///< realisations with an eigenvalue ≤ energy
    /**
     * From a weighted sample (tilted sampling): the mean is the unbiased
     * importance-sampling estimate, and the point is used only when its
     * effective sample size reaches TailFitLimits::min_point_effective_sample_size.
     */
    bool        weighted              = false;
    double      effective_sample_size = 0; ///< (Σ y)²/Σ y² of the mean's summands y = w·value
  };

  /** Slope fit of a tail, with the honest verdict of whether the data resolve it. */
  struct TailFit
  {
    bool        resolved = false;
    std::string reason; ///< why not resolved, or caveats when resolved
    double      window_low = 0, window_high = 0;
    std::size_t points = 0;           ///< grid points used
    std::size_t states = 0;           ///< eigenvalues in the window, all realisations
    std::size_t realisations = 0;     ///< realisations with an eigenvalue in the window
    /** NaN until a line has been fitted (fewer than 3 usable points: never). */
    static constexpr double unset = std::numeric_limits<double>::quiet_NaN();
    double      slope = unset, slope_error = unset, slope_low = unset, slope_high = unset;
    double      intercept = unset;
    double      chi_squared = unset;
    std::size_t dof         = 0;
    double      expected_slope = 0;   ///< Lifshitz: −d/2
    bool        consistent     = false; ///< Lifshitz: expected slope inside the interval
    double      urbach_energy = unset, urbach_low = unset, urbach_high = unset; ///< Urbach: 1/slope
    double      reference_energy = 0; ///< Urbach: E_ref
  };

  /** Minimum data for a tail fit (common practice, no source). */
  struct TailFitLimits
  {
    std::size_t min_points       = 4;
    std::size_t min_states       = 30;
    std::size_t min_realisations = 5;
    /** A grid point must rest on at least this many states to be weighted by its error. */
    std::size_t min_points_states = 5;
    /**
     * A weighted grid point must rest on at least this many effective
     * realisations: the normal interval of a weighted mean needs about that
     * many effective summands (common practice, no source; the same limit as
     * the deep-tail fits, DeepTailLimits).
     */
    double min_point_effective_sample_size = 10;
  };

  /**
   * Lifshitz fit. With @f$n(E) = N(E)\,a^d@f$ the IDS per unit cell and E0 the
   * bottom of the spectrum, fits @f$y = \ln(-\ln n)@f$ against
   * @f$x = \ln(E - E_0)@f$ by weighted least squares over grid points of the
   * window with 0 < n < 1, complete, and a positive standard error; weights
   * from the delta method, @f$\sigma_y = \sigma_n/(n\,|\ln n|)@f$. Lifshitz
   * behaviour @f$\ln N \approx -C (E-E_0)^{-d/2}@f$ gives the slope −d/2
   * (Lifshitz 1964; Kirsch & Martinelli 1983; from memory), reached only
   * asymptotically, so a finite window sees an effective slope.
   *
   * The interval is @f$\hat b \pm t_{\nu}\, s\, \sigma_b@f$ with s² = χ²/ν
   * (residual scale estimated, Student t with ν = points − 2). Neighbouring
   * grid points share realisations, so their errors are correlated and the
   * interval is approximate. An empty @p window means automatic: from the
   * first grid point above E0 with states to the first where n reaches
   * @p fraction. Not resolved (with the reason) when the window holds fewer
   * than the limits' points, states or realisations.
   */
  TailFit lifshitz_fit(const std::vector<GridValue> &ids, double e0, unsigned int dimension,
                       double cell_volume, std::vector<double> window, double fraction,
                       double confidence, const TailFitLimits &limits = {});

  /**
   * Urbach fit @f$\ln\rho(E) = a + (E - E_{ref})/E_U@f$ of a broadened DOS over
   * @p window = [E_a, E_b] below a band edge, E_ref = E_b; the Urbach energy is
   * 1/slope with the interval mapped from the slope's Student-t interval
   * (common practice in device work, no single source). Not resolved when too
   * few points, a non-positive slope, or @f$E_U@f$ not above twice the
   * broadening width (the kernel alone makes an exponential-looking edge of
   * that size).
   */
  TailFit urbach_fit(const std::vector<GridValue> &dos, const std::vector<double> &window,
                     double broadening_width, double confidence,
                     const TailFitLimits &limits = {});
} // namespace alloyspec
