/** @file team.h  Ranks that solve one realisation together. */
#pragma once

#include <alloyspec/fe/backend.h>

#include <mpi.h>

#include <memory>

namespace alloyspec
{
  struct SpectralProblem;

  /**
   * MPI_COMM_WORLD split into teams of consecutive ranks. Realisations are
   * dealt out to teams; the ranks of a team solve one realisation together:
   * the sparse factorisations (MUMPS), the Krylov iteration and the inertia
   * counts run on a copy of K and M distributed by contiguous blocks of rows.
   * The mesh and the assembly are repeated on every rank of the team (every
   * rank draws the same cell values, which depend on (seed, realisation,
   * cell) only), so the memory that is divided is that of the factor, the
   * dominant part (at L = 12, Q2, r = 2: 65M factor entries against 7.2M
   * nonzeros in K, measured).
   */
  class RealisationTeams
  {
  public:
    /**
     * Teams of @p ranks_per_team ranks, which must divide the number of
     * ranks (InputError naming `--ranks-per-realisation` otherwise).
     */
    explicit RealisationTeams(unsigned int ranks_per_team);
    ~RealisationTeams();
    RealisationTeams(const RealisationTeams &)            = delete;
    RealisationTeams &operator=(const RealisationTeams &) = delete;

    unsigned int size() const;   ///< ranks per team
    unsigned int count() const;  ///< number of teams
    unsigned int index() const;  ///< this rank's team
    bool         leader() const; ///< rank 0 of its team (the one that reports)
    /** The team's communicator (MPI_COMM_SELF for teams of one): that of its distributed mesh. */
    MPI_Comm     communicator() const;

    /**
     * The team's row-distributed copy of @p problem's K and M (created on
     * first use, same pattern for every realisation), with K's values
     * refreshed from @p problem. Collective over the team; only for size() > 1.
     */
    backend::MatrixPair distributed(const SpectralProblem &problem);

  private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
  };
} // namespace alloyspec
