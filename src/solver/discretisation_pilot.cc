#include <alloyspec/solver/discretisation_pilot.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/solver/error_estimate.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <sstream>
#include <utility>

namespace alloyspec
{
  namespace
  {
    std::vector<double> lowest_eigenvalues(const Lattice &lattice, const DiscretisationSettings &s,
                                           const BoundaryConditions &bcs,
                                           const EigenSolverSettings &solver,
                                           const std::vector<double> &cell_values)
    {
      auto discretisation = Discretisation::create(lattice, s, bcs);
      discretisation->make_grid();
      discretisation->setup_system();
      discretisation->assemble_fixed();
      auto problem = discretisation->make_problem();
      discretisation->assemble_potential(cell_values, *problem);
      EigenSolver solve(solver);
      return solve.solve(*problem).eigenvalues;
    }

    /** The corner block of at most @p ell cells per direction, and its cell values. */
    std::pair<Lattice, std::vector<double>> corner_block(const Lattice &lattice, unsigned int ell,
                                                         const std::vector<double> &cell_values)
    {
      std::vector<unsigned int> cells;
      for (const unsigned int L : lattice.cells())
        cells.push_back(std::min(L, ell));
      Lattice             block(cells, lattice.cell_size());
      std::vector<double> values(block.n_cells());
      for (std::size_t n = 0; n < values.size(); ++n)
        values[n] = cell_values.at(lattice.cell_index(block.cell_coordinates(n)));
      return {block, values};
    }

    std::string gib(double bytes)
    {
      return short_number(bytes / (1024.0 * 1024.0 * 1024.0), 3) + " GiB";
    }
  } // namespace

  DiscretisationChoice choose_discretisation(const Lattice &lattice, const BoundaryConditions &bcs,
                                             const EigenSolverSettings &solver,
                                             const std::vector<double> &cell_values,
                                             const double target, const double budget_bytes)
  {
    DiscretisationChoice choice;
    choice.budget_bytes = budget_bytes;
    std::ostringstream log;
    const unsigned int wanted = solver.n_eigenvalues;

    // 1. Energy ceiling: conforming eigenvalues lie above the exact ones
    // (min-max); Q2 keeps the ceiling within a few per cent at little cost.
    const DiscretisationSettings cheapest(1, 1), ceiling_space(2, 1);
    if (solver.energy_cutoff)
      choice.energy_ceiling = *solver.energy_cutoff;
    else
      {
        const DirectPathEstimate e = estimate_direct_path(lattice.cells(), 2, 1, wanted);
        if (e.bytes > budget_bytes)
          throw InputError("parameter 'discretisation/accuracy': the pilot's first space (degree 2, "
                           "one element per cell, " + std::to_string(e.dofs) +
                           " unknowns) needs an estimated " + gib(e.bytes) +
                           ", more than the memory budget of " + gib(budget_bytes) +
                           " (--memory-budget); use a smaller box or a larger budget");
        const std::vector<double> coarse =
          lowest_eigenvalues(lattice, ceiling_space, bcs, solver, cell_values);
        if (coarse.empty())
          throw InputError("parameter 'discretisation/accuracy': the pilot's first space has no "
                           "eigenvalues to estimate an energy range from");
        choice.energy_ceiling = coarse.back();
      }
    EigenSolverSettings pilot_solver = solver;
    // The pilot box holds other modes than the study's box at the same energy
    // (different mixes of directions, whose errors differ), so it looks a
    // margin higher: relative errors grow like λ^p.
    pilot_solver.energy_cutoff       = pilot_energy_margin * choice.energy_ceiling;
    pilot_solver.max_eigenvalues     = std::max(solver.max_eigenvalues, 5000u);

    // 2. Pilot box: the smallest corner block with enough eigenvalues below the ceiling.
    const unsigned int largest = *std::max_element(lattice.cells().begin(), lattice.cells().end());
    const BoundaryConditions neumann(lattice.dimension(), Boundary::neumann);
    std::pair<Lattice, std::vector<double>> pilot;
    for (unsigned int ell = std::min(2u, largest);; ++ell)
      {
        pilot = corner_block(lattice, ell, cell_values);
        choice.pilot_eigenvalues =
          lowest_eigenvalues(pilot.first, cheapest, neumann, pilot_solver, pilot.second).size();
        if (choice.pilot_eigenvalues >= min_pilot_eigenvalues || ell >= largest)
          break;
      }
    choice.pilot_cells = pilot.first.cells();

    // 3. Candidates by modelled cost of the study's solve.
    std::vector<PilotCandidate> candidates;
    for (unsigned int p = 1; p <= 4; ++p)
      for (unsigned int r = 1; r <= 8; r *= 2)
        {
          PilotCandidate c;
          c.settings  = DiscretisationSettings(p, r);
          c.study_box = estimate_direct_path(lattice.cells(), p, r, wanted);
          candidates.push_back(c);
        }
    std::stable_sort(candidates.begin(), candidates.end(),
                     [](const PilotCandidate &a, const PilotCandidate &b) {
                       return a.study_box.bytes < b.study_box.bytes;
                     });

    std::map<std::pair<unsigned int, unsigned int>, std::vector<double>> solved;
    auto pilot_eigenvalues = [&](unsigned int p, unsigned int r) -> const std::vector<double> & {
      auto it = solved.find({p, r});
      if (it == solved.end())
        it = solved
               .emplace(std::make_pair(p, r),
                        lowest_eigenvalues(pilot.first, DiscretisationSettings(p, r), neumann,
                                           pilot_solver, pilot.second))
               .first;
      return it->second;
    };

    const double nan  = std::numeric_limits<double>::quiet_NaN();
    bool         done = false;
    for (PilotCandidate &c : candidates)
      {
        const unsigned int p = c.settings.degree, r = c.settings.elements_per_cell;
        c.bound              = nan;
        const DirectPathEstimate fine_pilot =
          estimate_direct_path(pilot.first.cells(), p, 2 * r, unsigned(choice.pilot_eigenvalues));
        if (done)
          c.skipped = "not needed";
        else if (fine_pilot.bytes > budget_bytes)
          c.skipped = "its pilot solve (" + std::to_string(fine_pilot.dofs) +
                      " unknowns) exceeds the budget";
        else
          {
            const std::vector<double> &coarse = pilot_eigenvalues(p, r);
            const std::vector<double> &fine   = pilot_eigenvalues(p, 2 * r);
            const std::vector<double>  bounds = eigenvalue_error_bounds(
              coarse, fine, RicherSpace::mesh, p, solver.tolerance);
            double worst = coarse.empty() ? nan : 0.0;
            for (std::size_t i = 0; i < coarse.size(); ++i)
              worst = std::max(worst, std::isfinite(bounds[i]) ?
                                        bounds[i] / std::max(std::abs(coarse[i]), 1.0) :
                                        std::numeric_limits<double>::infinity());
            c.bound = worst;
          }
        log << "  degree " << p << ", elements per cell " << r << ": " << c.study_box.dofs
            << " unknowns, estimated " << gib(c.study_box.bytes) << "; ";
        if (c.skipped.empty())
          log << "largest relative error bound on the pilot box " << short_number(c.bound, 3);
        else
          log << c.skipped;
        log << '\n';
        if (!done && c.skipped.empty() && c.bound <= target)
          {
            done          = true;
            choice.met    = true;
            choice.settings = c.settings;
            choice.achieved = c.bound;
            if (c.study_box.bytes > budget_bytes)
              {
                throw InputError(
                  "parameter 'discretisation/accuracy' = " + short_number(target, 3) +
                  ": the cheapest space that meets it, degree " + std::to_string(p) + " with " +
                  std::to_string(r) + " element(s) per cell (" + std::to_string(c.study_box.dofs) +
                  " unknowns), needs an estimated " + gib(c.study_box.bytes) +
                  ", more than the memory budget of " + gib(budget_bytes) +
                  " (--memory-budget). Candidates tried:\n" + log.str() +
                  "Loosen the target, use a smaller box, or raise the budget.");
              }
          }
      }
    choice.candidates = candidates;
    choice.log        = log.str();
    if (!choice.met)
      {
        double best        = std::numeric_limits<double>::infinity();
        bool   over_budget = false;
        for (const PilotCandidate &c : candidates)
          {
            over_budget = over_budget || !c.skipped.empty() || c.study_box.bytes > budget_bytes;
            if (c.skipped.empty() && std::isfinite(c.bound) && c.study_box.bytes <= budget_bytes)
              best = std::min(best, c.bound);
          }
        const std::string why =
          over_budget ? "cannot be met within the memory budget of " + gib(budget_bytes) +
                          " (--memory-budget): the best estimated relative error within it is " :
                        "is finer than any candidate up to degree 4 with 8 elements per cell "
                        "reaches on the pilot box: the best estimated relative error is ";
        throw InputError("parameter 'discretisation/accuracy' = " + short_number(target, 3) + " " +
                         why + short_number(best, 3) + ". Candidates tried:\n" + choice.log +
                         "Allowed range of the target: [1e-12, 0.1]; loosen it" +
                         (over_budget ? ", or raise the budget." : ", or ask for fewer eigenvalues."));
      }
    return choice;
  }
} // namespace alloyspec
