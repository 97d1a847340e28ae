/** @file summary.h  Tables and analysis from stored results: one study, merged studies, box-size series. */
#pragma once

#include <alloyspec/analysis/analysis.h>
#include <alloyspec/analysis/spectrum_statistics.h>

#include <cstdint>
#include <map>
#include <string>
#include <vector>

namespace alloyspec
{
  /**
   * One folder's stored results, ready to tabulate: the analysis input (model,
   * grid, records of the study's own realisations) plus the phase-space count
   * @f$N_{sc}(E)@f$ summed over those realisations.
   */
  struct StoredStudy
  {
    std::string                        directory;
    /** Effective parameters as "section/entry" → value. */
    std::map<std::string, std::string> parameters;
    AnalysisInput                      input;
    std::vector<double>                semiclassical_sum;
    std::uint64_t                      seed = 0;
    /**
     * The records carry balance-heuristic weights over the merged studies'
     * tilts (StudyModel::apply_tilt_mixture): folders may then differ in
     * their `sampling/...` entries.
     */
    bool                               tilt_mixture = false;
  };

  /**
   * The text of ids.csv: per energy, the mean counting function and its
   * standard error for each boundary condition (columns in the order
   * dirichlet, neumann, periodic, whichever are present), the Dirichlet–Neumann
   * width, the completeness flags, the semiclassical count and the number of
   * realisations. @p rows[b] belongs to @p boundaries[b]. Shared by `run`,
   * `summarise` and `count`, so that all three write the same columns.
   */
  std::string format_ids_table(const std::vector<std::string>                   &boundaries,
                               const std::vector<double>                        &energies,
                               const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                               const std::vector<double>                        &semiclassical,
                               std::size_t                                       n_realisations);

  /**
   * The line a tilted study prints per boundary condition: Kong's effective
   * sample size of the weights and their mean (1 in expectation), with a
   * warning when the effective sample size is below a tenth of the
   * realisations (the weights are degenerate).
   */
  std::string weight_warning(const std::string &boundary, const IdsAccumulator &ids);

  /**
   * Writes ids.csv (mean counting functions with standard errors, completeness
   * flags, width of the Dirichlet–Neumann bracket, semiclassical count) and the
   * full analysis (DOS, bands, tails, localisation, figures, report) for the
   * realisations of @p studies merged into one sample. All must describe the
   * same model (checked by merge_studies()). Returns warnings to print.
   */
  std::vector<std::string> write_study_tables(const std::string              &output_dir,
                                              const std::vector<StoredStudy> &studies,
                                              const AnalysisSettings         &settings);

  /**
   * `alloyspec summarise`: folders of one model are merged; folders that differ
   * only in `lattice/cells` form a box-size series, merged per size and then
   * extrapolated in 1/L. Any other difference, or the same realisation stored
   * twice, is an InputError naming the differing parameters.
   */
  std::vector<std::string> summarise_studies(const std::string              &output_dir,
                                             const std::vector<StoredStudy> &studies,
                                             const AnalysisSettings         &settings);
} // namespace alloyspec
