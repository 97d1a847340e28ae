/** @file iterative_workspace.h  What the iterative path keeps per problem (solver sources only). */
#pragma once

#include "block_amg.h"

#include <alloyspec/solver/eigen_solver.h>

#include <petscmat.h>

#include <vector>

namespace alloyspec
{
  /**
   * The matrices the solver works on (the problem's own, or the team's
   * distributed copy) and the problem they belong to (constrained rows,
   * bounds, and the key of everything kept across realisations).
   */
  struct EigenSolver::Pencil
  {
    Mat                    K = nullptr;
    Mat                    M = nullptr;
    const SpectralProblem *problem = nullptr;
  };

  /** The AMG hierarchy of K − σM, its matrix graph kept across realisations. */
  struct EigenSolver::IterativeWorkspace
  {
    internal::BlockAmg amg;
  };
} // namespace alloyspec
