#include <alloyspec/app/spectrum_settings.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/text_input.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

namespace alloyspec
{
  void SpectrumSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("spectrum");
    prm.declare_entry("eigenvalues", "50", dealii::Patterns::Integer(1, 100000),
                      "Number k of lowest eigenvalues per realisation and boundary condition "
                      "(a degenerate cluster at the top is kept whole, so a few more may be "
                      "reported). Ignored when an energy cutoff is set.");
    prm.declare_entry("energy cutoff", "", dealii::Patterns::Anything(),
                      "If not empty: compute all eigenvalues at or below this energy instead of a "
                      "fixed count (their number is first found by an inertia count).");
    prm.declare_entry("tolerance", "1e-12", dealii::Patterns::Double(1e-15, 1e-4),
                      "Relative convergence tolerance of the Krylov-Schur iteration.");
    prm.declare_entry("solver", "tuned", dealii::Patterns::Selection("tuned|baseline|iterative|auto"),
                      "tuned: block shift-and-invert Krylov-Schur (8-32 right-hand sides per "
                      "sparse solve, full M-orthogonalisation, purified Ritz vectors), the sparse "
                      "factor's analysis kept across realisations; problems too small for a "
                      "block basis use single-vector SLEPc Krylov-Schur. baseline: SLEPc "
                      "Krylov-Schur with the library's defaults, a shift below the spectrum and "
                      "fresh objects per solve, for benchmarks. Both lists are verified by the "
                      "same inertia count. iterative: LOBPCG preconditioned by algebraic "
                      "multigrid (Trilinos MueLu, cycling blocks of columns) of K - sigma M, "
                      "memory and work per iteration "
                      "linear in the unknowns; its list is checked by an inertia count up to "
                      "'inertia check limit' unknowns, beyond that by eigenvalue enclosures "
                      "only (realisations.csv, verified_by). auto: iterative from 'auto "
                      "crossover' unknowns on, tuned below.");
    prm.declare_entry("inertia check limit", "300000", dealii::Patterns::Integer(0),
                      "Largest number of unknowns at which the iterative solver checks its list "
                      "by an inertia count (a sparse factorisation, memory growing like "
                      "N^(4/3): about 3.4 GiB at 274k unknowns, Q2). Beyond it, lists are "
                      "verified by enclosures only.");
    prm.declare_entry("auto crossover", "300000", dealii::Patterns::Integer(0),
                      "Number of unknowns from which 'solver = auto' uses the iterative solver. "
                      "Measured (README, Performance): the direct path was 2-3x faster at every "
                      "size up to 118k unknowns (Q2) and the iterative one needs about 2/3 of its "
                      "memory, so the default switches where the factor stops fitting, at the "
                      "inertia check limit.");
    prm.declare_entry("maximum eigenvalues", "5000", dealii::Patterns::Integer(1, 1000000),
                      "Upper limit on the eigenpairs one solve may be asked for (guards the "
                      "energy-cutoff mode against a cutoff far above the band edge).");
    prm.declare_entry("boundary conditions", "dirichlet, neumann",
                      dealii::Patterns::List(dealii::Patterns::Selection("dirichlet|neumann|periodic"), 1, 3),
                      "Boundary conditions to solve with, each on all faces of the box, with the "
                      "same cell values. Dirichlet and Neumann together bracket the "
                      "infinite-volume IDS from below and above.");
    prm.declare_entry("periodic directions", "", dealii::Patterns::Anything(),
                      "Directions (a list of x, y, z) that are periodic in every solve; the "
                      "conditions of 'boundary conditions' then apply to the faces of the other "
                      "directions only. Empty: none. A slab: 'x, y'; a wire along z: 'z'. Not "
                      "allowed together with 'lattice/mesh file'.");
    prm.leave_subsection();
  }

  void SpectrumSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("spectrum");
    solver.n_eigenvalues = prm.get_integer("eigenvalues");
    solver.energy_cutoff =
      optional_number(prm.get("energy cutoff"), "spectrum/energy cutoff",
                      -std::numeric_limits<double>::max(), std::numeric_limits<double>::max(),
                      "empty, or a finite real number");
    solver.tolerance       = prm.get_double("tolerance");
    solver.method          = prm.get("solver");
    solver.max_eigenvalues = prm.get_integer("maximum eigenvalues");
    solver.inertia_limit   = static_cast<std::size_t>(prm.get_integer("inertia check limit"));
    solver.auto_crossover  = static_cast<std::size_t>(prm.get_integer("auto crossover"));
    boundaries.clear();
    for (const auto &name : dealii::Utilities::split_string_list(prm.get("boundary conditions")))
      {
        const Boundary bc = boundary_from_string(name, "spectrum/boundary conditions");
        if (std::find(boundaries.begin(), boundaries.end(), bc) != boundaries.end())
          throw InputError("parameter 'spectrum/boundary conditions': '" + name +
                           "' is listed twice (allowed: each of dirichlet, neumann, periodic once)");
        boundaries.push_back(bc);
      }
    periodic_directions = prm.get("periodic directions");
    prm.leave_subsection();
  }
} // namespace alloyspec
