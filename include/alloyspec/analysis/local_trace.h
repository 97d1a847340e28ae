/** @file local_trace.h  The local-trace estimators of the IDS and DOS from the central cell. */
#pragma once

#include <alloyspec/analysis/spectrum_statistics.h>

#include <string>
#include <vector>

namespace alloyspec
{
  struct AnalysisInput;
  struct RealisationRecord;

  /** The local-trace estimate at one energy. */
  struct LocalTraceRow
  {
    double      energy;
    double      ids            = 0; ///< N_loc(E), per unit volume
    double      standard_error = 0; ///< of N_loc (0 with fewer than 2 realisations)
    double      dos            = 0; ///< n_loc(E), Lorentzian of width η, per unit volume and energy
    double      dos_standard_error = 0; ///< of n_loc, like that of N_loc
    std::size_t realisations   = 0; ///< records with central weights
  };

  /**
   * The local-trace estimators from the central cell's weights
   * @f$c_j = \int_{\chi_0}|\psi_j|^2@f$ of the records of @p boundary:
   * @f[ N_{loc}(E) = E\Big[\sum_{\lambda_j\le E} c_j\Big]/|\chi_0|,\qquad
   *     n_{loc}(E) = E\Big[\sum_j c_j\,\delta_\eta(E-\lambda_j)\Big]/|\chi_0| @f]
   * (Lorentzian @f$\delta_\eta@f$; the local-trace definition of the IDS, e.g.
   * Kirsch, "An invitation to random Schrödinger operators", 2008, from
   * memory). Each expectation is the unbiased importance-sampling mean
   * @f$\frac1R\sum_r w_r X_r@f$ with @f$w_r = e^{\log w_r}@f$ (1 for plain
   * sampling, which leaves every number bit for bit), and the standard error
   * of N_loc is the sample standard deviation of @f$w_r X_r@f$ over √R.
   * Records without central weights (older versions) are left out;
   * @p have_weights is set when any record has them.
   */
  std::vector<LocalTraceRow> local_trace_estimate(const std::vector<RealisationRecord> &records,
                                                  const std::string                    &boundary,
                                                  const std::vector<double>            &energies,
                                                  double cell_volume, double eta,
                                                  bool &have_weights);

  /**
   * Writes local_trace.csv: per energy and boundary the local-trace IDS with
   * its standard error, the counting IDS of @p rows, their difference in
   * combined standard errors, the local DOS and the completeness flag (taken
   * from @p rows). Nothing is written when no record has central weights.
   */
  void write_local_trace_table(const std::string &output_dir, const AnalysisInput &merged,
                               const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                               double eta);
} // namespace alloyspec
