#include <alloyspec/solver/direct_path_model.h>

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace alloyspec
{
  DirectPathEstimate estimate_direct_path(const std::vector<unsigned int> &cells,
                                          const unsigned int degree,
                                          const unsigned int elements_per_cell,
                                          const unsigned int n_eigenvalues)
  {
    if (cells.empty() || cells.size() > 3 || degree == 0 || elements_per_cell == 0)
      throw std::invalid_argument("estimate_direct_path: 1 to 3 directions, p ≥ 1, r ≥ 1");
    DirectPathEstimate e;
    e.dofs = e.elements = e.matrix_entries = 1;
    const std::size_t p1 = degree + 1;
    for (std::size_t i = 0; i < cells.size(); ++i)
      {
        const std::size_t ne   = std::size_t(cells[i]) * elements_per_cell;
        e.elements *= ne;
        e.dofs *= degree * ne + 1;
        e.matrix_entries *= ne * p1 * p1 - (ne - 1);
      }
    const double n = static_cast<double>(e.dofs);
    switch (cells.size())
      {
        case 1: e.factor_entries = 3.5 * n; break;
        case 2: e.factor_entries = 2.9 * n * std::log2(std::max(n, 2.0)); break;
        default: e.factor_entries = 12.9 * std::pow(n, 4.0 / 3.0); break;
      }
    const double mib = 1024.0 * 1024.0;
    e.bytes = memory_model_safety *
              (173 * mib + 2450.0 * double(e.elements) + 81.5 * double(e.matrix_entries) +
               10.1 * e.factor_entries + 77.0 * double(n_eigenvalues) * n);
    return e;
  }
} // namespace alloyspec
