/**
 * @file deep_tail.h  Lifshitz fits on the deep band tail of tail.csv, in both
 * usual forms, with the exponent's interval against d/2 and a stated criterion
 * for "not asymptotic"; deep_tail.json and the report of a tilted study.
 */
#pragma once

#include <alloyspec/analysis/analysis.h>
#include <alloyspec/analysis/spectrum_statistics.h>

#include <cstddef>
#include <limits>
#include <string>
#include <vector>

namespace alloyspec
{
  /** One point of the deep tail: IDS per unit cell n = N a^d with its standard error. */
  struct DeepTailPoint
  {
    double energy;
    double n;              ///< IDS per unit cell
    double standard_error; ///< of n
    double effective_sample_size;
  };

  /**
   * The two Lifshitz fits of one boundary condition's deep tail. With E0 the
   * bottom of the spectrum, Lifshitz behaviour
   * @f$\ln n(E) \approx -C\,(E - E_0)^{-\alpha}@f$ with @f$\alpha = d/2@f$
   * (Lifshitz 1964; Kirsch & Martinelli 1983; from memory) is tested as
   * - form A, @f$\ln(-\ln n) = \ln C - \alpha \ln(E - E_0)@f$: a straight line,
   *   weighted least squares with @f$\sigma_y = \sigma_n/(n|\ln n|)@f$ (delta
   *   method); α = −slope;
   * - form B, @f$\ln n = a - C (E - E_0)^{-\alpha}@f$ with @f$\sigma_y = \sigma_n/n@f$:
   *   at α = d/2 a straight line in @f$x = (E-E_0)^{-d/2}@f$ giving C and its
   *   χ²; with α free, the profile @f$\chi^2(\alpha)@f$ (a linear fit for
   *   each α on a grid) gives α̂ at its minimum and the interval
   *   @f$\chi^2(\alpha) - \chi^2_{min} \le z^2 s^2@f$ (Wilks; z the two-sided
   *   normal quantile of the confidence level).
   * Intervals are scaled by @f$s^2 = \max(1, \chi^2/\nu)@f$: never narrower
   * than the given errors imply, wider when the line does not describe the
   * points within them.
   */
  struct DeepTailFit
  {
    static constexpr double unset = std::numeric_limits<double>::quiet_NaN();
    bool        fitted = false;
    std::string reason; ///< why no fit, or empty
    double      window_low = unset, window_high = unset;
    std::size_t points = 0;
    double      n_high = unset, n_low = unset; ///< largest and smallest n in the window
    double      expected_exponent = unset;     ///< d/2

    // Form A.
    double      exponent_a = unset, exponent_a_low = unset, exponent_a_high = unset;
    double      chi_squared_a = unset;
    std::size_t dof_a         = 0;
    // Form B at α = d/2.
    double      constant_b = unset, constant_b_error = unset, intercept_b = unset;
    double      chi_squared_b = unset;
    std::size_t dof_b         = 0;
    // Form B with α free (profile).
    double      exponent_b = unset, exponent_b_low = unset, exponent_b_high = unset;
    /** The profile interval reached an end of the α grid (the data do not bound α there). */
    bool        exponent_b_open = false;
    // Drift of the local exponent (form A on the lower and upper half of the window).
    double      exponent_lower_half = unset, exponent_lower_half_error = unset;
    double      exponent_upper_half = unset, exponent_upper_half_error = unset;

    /** The window passes every test of asymptotic behaviour listed in deep_tail_fit(). */
    bool                     asymptotic = false;
    std::vector<std::string> not_asymptotic_because;
  };

  /** What a deep-tail point needs (common practice, no source). */
  struct DeepTailLimits
  {
    /** The normal interval of a weighted mean needs this many effective summands. */
    double      min_effective_sample_size = 10;
    std::size_t min_points                = 4;
    /** Fewer e-folds of n across the window cannot tell the exponent apart. */
    double      min_e_folds = 2;
  };

  /**
   * The deep tail of @p rows (IdsAccumulator rows of one boundary condition,
   * N per unit volume): points with E > E0, a complete count, 0 < n ≤
   * @p fraction (n per unit cell), a positive standard error and an effective
   * sample size of at least the limit's. Fits both forms over all of them.
   *
   * "Not asymptotic" (asymptotic = false) when any of these holds, each named
   * in not_asymptotic_because:
   * 1. the form-A interval of α excludes d/2;
   * 2. the form-B profile interval of α excludes d/2;
   * 3. the local exponent drifts: form A on the lower and on the upper half of
   *    the window (at least 3 points each) gives exponents that differ by
   *    more than z·√(σ₁² + σ₂²) (an effective exponent still changing with E);
   * 4. n spans fewer than min_e_folds e-folds across the window;
   * 5. form B at α = d/2 has χ² above the (1 + c)/2 quantile of the χ²_ν law
   *    (Boost.Math): the asymptotic law does not describe the points within
   *    their errors.
   * Passing them means consistency with d/2 at this depth, not a proof.
   * Neighbouring energies share realisations, so the errors are correlated
   * and the intervals approximate.
   */
  DeepTailFit deep_tail_fit(const std::vector<IdsAccumulator::Row> &rows, double e0,
                            unsigned int dimension, double cell_volume, double fraction,
                            double confidence, const DeepTailLimits &limits = {});

  /** The points deep_tail_fit() uses (n per unit cell). */
  std::vector<DeepTailPoint> deep_tail_points(const std::vector<IdsAccumulator::Row> &rows,
                                              double e0, double cell_volume, double fraction,
                                              const DeepTailLimits &limits = {});

  /** Weight summary of one boundary condition's sample, for the report and deep_tail.json. */
  struct WeightSummary
  {
    std::size_t realisations          = 0;
    double      effective_sample_size = 0;
    double      mean_weight           = 0;
  };

  /**
   * Writes `deep_tail.json` (the fits of every boundary condition, the criterion
   * and the weight summaries) and the figure `figures/deep_tail` (ln N against
   * E with intervals). With @p report (a weighted study), adds to it the
   * sections a tilted study's report opens with: the effective sample sizes,
   * the smallest N resolved, the tail table, the figure, the fits and the
   * estimator; write_analysis() renders it with everything else.
   * Returns warnings (gnuplot missing, …).
   */
  std::vector<std::string> write_deep_tail(const std::string                                   &output_dir,
                                           const AnalysisInput                                 &input,
                                           const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                                           const std::vector<WeightSummary>                    &weights,
                                           const AnalysisSettings &settings,
                                           ReportContent          *report = nullptr);
} // namespace alloyspec
