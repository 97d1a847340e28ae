/** @file boundary.h  The boundary conditions a box can carry. */
#pragma once

#include <string>

namespace alloyspec
{
  /**
   * Condition on a pair of opposite faces: u = 0 (Dirichlet), ∂u/∂n = 0
   * (Neumann) or u(x + L e_i) = u(x) (periodic). Dirichlet and Neumann on
   * cell-aligned boxes bracket the infinite-volume IDS from below and above.
   */
  enum class Boundary
  {
    dirichlet,
    neumann,
    periodic
  };

  /** Parses "dirichlet", "neumann", "periodic" (throws InputError naming @p parameter). */
  Boundary    boundary_from_string(const std::string &name, const std::string &parameter);
  std::string to_string(Boundary bc);

} // namespace alloyspec
