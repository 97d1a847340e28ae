/** @file landscape_study.h  The `landscape` command over the realisations of a study. */
#pragma once

#include <alloyspec/solver/landscape.h>

#include <string>
#include <vector>

namespace alloyspec
{
  class StudyModel;

  /**
   * `alloyspec landscape`: for the realisations and boundary conditions of a
   * study, one landscape solve each; writes into the output folder
   * `landscape.csv` (energy; per boundary condition landscape_<bc> and, when
   * the folder holds eigenvalues of the same realisations from `alloyspec run`,
   * exact_<bc>, complete_<bc> and relative_difference_<bc> = (N_W − N)/N),
   * `landscape_eigenvalues.csv` (estimates of the lowest eigenvalues with the
   * exact ones where stored) and `landscape.json` (timings: landscape solve
   * against the stored eigen-solve times).
   */
  class LandscapeStudy
  {
  public:
    LandscapeStudy(const StudyModel &model, const LandscapeSettings &settings);
    /** Runs on MPI rank 0 (the other ranks return at once). Returns lines to print. */
    std::vector<std::string> run(const std::string &output_directory, bool progress);

  private:
    const StudyModel &model_;
    LandscapeSettings settings_;
  };
} // namespace alloyspec
