/** @file list_cut.h  Where a list of eigenvalues may be cut: between two clusters (solver sources only). */
#pragma once

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

namespace alloyspec::internal
{
  /** Relative gap below which two eigenvalues count as one cluster (common practice, no source). */
  constexpr double cluster_gap = 1e-8;

  /**
   * Smallest j ≥ k with values[j] clearly above values[j-1], so that the
   * list values[0..j) ends between two clusters; 0 if there is none.
   */
  inline std::size_t cut_index(const std::vector<double> &values, std::size_t k)
  {
    for (std::size_t j = std::max<std::size_t>(k, 1); j < values.size(); ++j)
      if (values[j] - values[j - 1] > cluster_gap * std::max(1.0, std::abs(values[j])))
        return j;
    return 0;
  }
} // namespace alloyspec::internal
