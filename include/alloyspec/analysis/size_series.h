/**
 * @file size_series.h  A box-size series: the same model on boxes of several
 * sizes L, the fit @f$N_L(E) = N_\infty(E) + c(E)/L@f$ per energy and boundary
 * condition, the checks that make a fitted @f$N_\infty@f$ trustworthy, and the
 * tables and figures of the series.
 */
#pragma once

#include <alloyspec/analysis/analysis.h>
#include <alloyspec/analysis/tail_fits.h>

#include <cstddef>
#include <string>
#include <vector>

namespace alloyspec
{
  /**
   * Fewest usable box sizes for the fit: two parameters (N∞, c) and one degree
   * of freedom left for χ², so that the 1/L form itself is tested.
   */
  inline constexpr std::size_t min_sizes_for_extrapolation = 3;

  /** The mean IDS of one box size at one energy, as the fit takes it. */
  struct SizePoint
  {
    double      size;     ///< L, cells per direction
    double      mean;     ///< mean of N_L(E) over realisations (per volume)
    double      error;    ///< its standard error
    bool        complete; ///< every realisation's spectrum complete at E
    std::size_t realisations;
    double      volume;   ///< |Λ| of this box
  };

  /** The fit at one energy for one boundary condition, or why there is none. */
  struct SizeFit
  {
    bool          fitted = false;
    /** Fitted, and N∞ neither negative nor outside the largest box's bracket. */
    bool          consistent = false;
    Extrapolation result;
    std::vector<double> sizes_used;
    /** Why the fit was skipped, or why it is flagged inconsistent; empty otherwise. */
    std::string   reason;
  };

  /**
   * The standard error given to a mean whose realisations all had the same
   * count: 1/(n|Λ|), the change of the mean if one of the n realisations had
   * one state more. A sample without spread says the spread is below the
   * resolution of the counts, not that it is zero (our choice, no source).
   */
  double count_resolution_error(std::size_t realisations, double volume);

  /**
   * Fits N_L = N∞ + c/L (tail_fits.h) to the usable sizes among @p points: a size
   * is left out when its count is incomplete at this energy, or when no
   * realisation has a state at or below it (the energy is below the box's lowest
   * level, where N_L = 0 is not of the form N∞ + c/L). Fewer than
   * min_sizes_for_extrapolation usable sizes: no fit, and the reason lists the
   * sizes left out and why.
   */
  SizeFit fit_size_series(const std::vector<SizePoint> &points);

  /**
   * Flags a fit as inconsistent, with the reason, when the estimate N∞ is
   * negative or lies outside the Dirichlet–Neumann bracket of the largest box
   * (E[N_L^D] ≤ N ≤ E[N_L^N] for every L, Kirsch & Martinelli 1982). The test
   * is on the estimate, not its interval: an estimate that is no possible IDS
   * is not drawn as one; the reason quotes the intervals at @p confidence.
   * @p lower and @p upper are the largest box's means with their errors; NaN
   * skips that side.
   */
  void check_against_bracket(SizeFit &fit, double lower, double lower_error, double upper,
                             double upper_error, double confidence);

  /**
   * `summarise` of several box sizes: writes extrapolation.csv,
   * extrapolation.json (the reason for every skipped or flagged fit),
   * ids_by_size.csv, bracket_width.csv, the figures of the series (IDS of
   * every L, N_L against 1/L with the fits, bracket width against L, N∞), and
   * then the full analysis of the largest box with the series added to its
   * report. Needs at least two studies with the same energy grid and
   * dimension (InputError otherwise); with fewer than
   * min_sizes_for_extrapolation the tables and figures are written without
   * fits, and a warning says so.
   */
  std::vector<std::string> write_size_series(const std::string                &output_dir,
                                             const std::vector<AnalysisInput> &studies,
                                             const AnalysisSettings           &settings);
} // namespace alloyspec
