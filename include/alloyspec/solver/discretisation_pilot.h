/** @file discretisation_pilot.h  Choosing degree and elements per cell for an accuracy target. */
#pragma once

#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/direct_path_model.h>
#include <alloyspec/solver/eigen_solver.h>

#include <string>
#include <vector>

namespace alloyspec
{
  class Lattice;

  /** One (p, r) the pilot considered. */
  struct PilotCandidate
  {
    DiscretisationSettings settings;
    /** The study's box at this (p, r): sizes and modelled memory. */
    DirectPathEstimate     study_box;
    /** Largest relative error bound on the pilot box; NaN if not computed. */
    double                 bound = 0;
    /** Why no bound was computed (empty when it was). */
    std::string            skipped;
  };

  /** Outcome of the pilot that picks degree and elements per cell for a target accuracy. */
  struct DiscretisationChoice
  {
    DiscretisationSettings      settings;
    double                      achieved = 0; ///< the chosen candidate's bound on the pilot box
    bool                        met      = false;
    std::vector<unsigned int>   pilot_cells;  ///< cells per direction of the pilot box
    std::size_t                 pilot_eigenvalues = 0; ///< pilot-box eigenvalues at or below the ceiling
    double                      energy_ceiling = 0;    ///< solver units
    double                      budget_bytes   = 0;
    std::vector<PilotCandidate> candidates;   ///< in the order tried (increasing modelled cost)
    std::string                 log;          ///< one line per candidate
  };

  /**
   * Picks the cheapest (p, r), p ≤ 4, r ∈ {1, 2, 4, 8}, whose eigenvalues
   * meet the relative target
   * @f$\max_i \mathrm{err}_i / \max(|\lambda_i|, 1) \le@f$ @p target, and
   * whose study-box solve fits in @p budget_bytes.
   *
   * 1. Energy ceiling @f$E_c@f$: the highest eigenvalue the study asks for,
   *    from a solve of the study's box at Q2 with one element per cell (an
   *    upper bound of the exact one, by min-max: conforming spaces give
   *    eigenvalues from above; a few per cent high), or the energy cutoff itself.
   * 2. Pilot box: the corner block of @f$\ell^d@f$ cells of the same
   *    realisation (@f$\ell@f$ the smallest from 2 whose Neumann problem has at
   *    least @ref min_pilot_eigenvalues eigenvalues ≤ @f$1.25 E_c@f$), with Neumann
   *    faces. The element error of an eigenvalue is set by its energy and the
   *    cell potential around it, not by the size of the box; Neumann faces put
   *    the most eigenvalues below @f$E_c@f$, and on flat faces both conditions
   *    give eigenfunctions as smooth at the face as inside (reflection).
   * 3. Candidates in increasing modelled cost of the study-box solve
   *    (estimate_direct_path(): memory, dominated by the factor). For each,
   *    the pilot box is solved at (p, r) and (p, 2r) for all eigenvalues
   *    ≤ @ref pilot_energy_margin @f$E_c@f$ and eigenvalue_error_bounds() gives the bounds (Richardson
   *    on h → h/2 with the safety factor 3); solves are cached, so (p, 2r)
   *    serves the next candidate of degree p. The first candidate whose bound
   *    meets the target is the cheapest that does.
   *
   * The bound is an estimate on the pilot box, not a guarantee for the
   * study's box; `discretisation/error estimate = richardson` checks every
   * realisation. Throws InputError (naming `discretisation/accuracy` and the
   * budget) when the cheapest candidate that meets the target needs more
   * than @p budget_bytes, or when none of those the budget allows meets it.
   *
   * @param cell_values the realisation's cell values (solver units), in the
   *        lattice's lexicographic order.
   */
  DiscretisationChoice choose_discretisation(const Lattice &lattice,
                                             const BoundaryConditions &bcs,
                                             const EigenSolverSettings &solver,
                                             const std::vector<double> &cell_values,
                                             double target, double budget_bytes);

  /**
   * The pilot box is solved up to this multiple of the energy ceiling. Without
   * it, a 6 x 6 separable box at Q4, r = 2 had a true error of 3.0e-7 against a
   * pilot bound of 1.6e-7 (tests/unit/solver/test_discretisation_pilot.cc);
   * with it the bound lies above the truth in the cases tested (a margin, common
   * practice, no source).
   */
  constexpr double pilot_energy_margin = 1.25;

  /** Fewest eigenvalues the pilot box must have below the energy ceiling. */
  constexpr std::size_t min_pilot_eigenvalues = 8;
} // namespace alloyspec
