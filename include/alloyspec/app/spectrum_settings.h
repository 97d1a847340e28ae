/** @file spectrum_settings.h  Subsection `spectrum`: what to solve for, and on which faces. */
#pragma once

#include <alloyspec/model/boundary.h>
#include <alloyspec/solver/eigen_solver.h>

#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  /**
   * The one owner of subsection `spectrum`: the eigen-solver's entries
   * (eigenvalues, energy cutoff, tolerance, solver, maximum eigenvalues), the
   * bracketing boundary conditions, and the periodic directions (applied by
   * GeometrySettings::configure()).
   */
  struct SpectrumSettings
  {
    /** Energy cutoff in the user's unit as read; StudyModel converts it to solver units. */
    EigenSolverSettings   solver;
    std::vector<Boundary> boundaries{Boundary::dirichlet, Boundary::neumann};
    std::string           periodic_directions;

    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `spectrum`; InputError naming the entry for a bad value. */
    void parse_parameters(dealii::ParameterHandler &prm);
  };
} // namespace alloyspec
