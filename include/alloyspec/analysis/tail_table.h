/** @file tail_table.h  tail.csv: the (weighted) IDS deep in the band tail, with intervals and effective sample sizes. */
#pragma once

#include <alloyspec/analysis/spectrum_statistics.h>

#include <string>
#include <vector>

namespace alloyspec
{
  /**
   * The text of tail.csv: columns `energy`, then for each boundary condition X
   * `ids_X`, `lower_X`, `upper_X`, `ess_X`, and after all of them `log_ids_X`
   * (ln N, `nan` where N = 0). The interval is the normal one,
   * @f$\hat N \pm z\,\mathrm{SE}@f$ with @f$z = \Phi^{-1}((1+c)/2)@f$ at the
   * confidence level c, cut at 0 below (N ≥ 0); ess_X is the effective number
   * of realisations behind the estimate (IdsAccumulator::Row). Rows are the
   * energies of the grid, so the table reaches down to the smallest N the
   * sample resolves. Where a row is incomplete (above some realisation's
   * verified range, an under-count) every value of its boundary condition is
   * written as the missing marker. @p rows[b] belongs to @p boundaries[b].
   */
  std::string format_tail_table(const std::vector<std::string>                      &boundaries,
                                const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                                double confidence_level);
} // namespace alloyspec
