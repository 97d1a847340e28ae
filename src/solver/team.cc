#include "petsc_handle.h"
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/solver/team.h>

#include <deal.II/base/mpi.h>

#include <petscmat.h>

#include <algorithm>
#include <memory>
#include <utility>
#include <stdexcept>
#include <string>
#include <vector>

namespace alloyspec
{
  namespace
  {

    /** Rows [first, last) of the serial @p source into the distributed @p target. */
    void copy_rows(Mat source, Mat target, PetscInt first, PetscInt last)
    {
      for (PetscInt i = first; i < last; ++i)
        {
          PetscInt           nc   = 0;
          const PetscInt    *cols = nullptr;
          const PetscScalar *vals = nullptr;
          ALLOYSPEC_CHECK(MatGetRow(source, i, &nc, &cols, &vals));
          ALLOYSPEC_CHECK(MatSetValues(target, 1, &i, nc, cols, vals, INSERT_VALUES));
          ALLOYSPEC_CHECK(MatRestoreRow(source, i, &nc, &cols, &vals));
        }
      ALLOYSPEC_CHECK(MatAssemblyBegin(target, MAT_FINAL_ASSEMBLY));
      ALLOYSPEC_CHECK(MatAssemblyEnd(target, MAT_FINAL_ASSEMBLY));
    }
  } // namespace

  struct RealisationTeams::Impl
  {
    MPI_Comm     comm = MPI_COMM_NULL;
    unsigned int size = 1, count = 1, index = 0, rank = 0;
    struct Copy
    {
      internal::OwnedMat K, M;
      PetscInt    first = 0, last = 0;
    };
    /**
     * In the order first distributed, the same on every rank (not keyed by
     * address, which differs between ranks), so that the collective
     * destruction happens in one order everywhere.
     */
    std::vector<std::pair<const SpectralProblem *, std::unique_ptr<Copy>>> copies;

    ~Impl()
    {
      while (!copies.empty())
        copies.pop_back();
      if (comm != MPI_COMM_NULL)
        MPI_Comm_free(&comm);
    }
  };

  RealisationTeams::RealisationTeams(const unsigned int ranks_per_team)
    : impl_(std::make_unique<Impl>())
  {
    const unsigned int ranks = dealii::Utilities::MPI::n_mpi_processes(MPI_COMM_WORLD);
    const unsigned int rank  = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD);
    if (ranks_per_team < 1 || ranks % ranks_per_team != 0)
      throw InputError("option '--ranks-per-realisation': " + std::to_string(ranks_per_team) +
                       " does not divide the number of MPI ranks, " + std::to_string(ranks) +
                       " (allowed: a divisor of " + std::to_string(ranks) + ")");
    impl_->size  = ranks_per_team;
    impl_->count = ranks / ranks_per_team;
    impl_->index = rank / ranks_per_team;
    impl_->rank  = rank % ranks_per_team;
    if (ranks_per_team > 1)
      MPI_Comm_split(MPI_COMM_WORLD, int(impl_->index), int(rank), &impl_->comm);
  }

  RealisationTeams::~RealisationTeams() = default;

  unsigned int RealisationTeams::size() const { return impl_->size; }
  unsigned int RealisationTeams::count() const { return impl_->count; }
  unsigned int RealisationTeams::index() const { return impl_->index; }
  bool         RealisationTeams::leader() const { return impl_->rank == 0; }
  MPI_Comm     RealisationTeams::communicator() const
  {
    return impl_->size > 1 ? impl_->comm : MPI_COMM_SELF;
  }

  backend::MatrixPair RealisationTeams::distributed(const SpectralProblem &problem)
  {
    if (impl_->size < 2)
      throw std::logic_error("RealisationTeams::distributed needs teams of two or more ranks");
    const Mat K = problem.K;
    const Mat M = problem.M;
    auto found = std::find_if(impl_->copies.begin(), impl_->copies.end(),
                              [&](const auto &entry) { return entry.first == &problem; });
    if (found == impl_->copies.end())
      {
        impl_->copies.emplace_back(&problem, std::make_unique<Impl::Copy>());
        Impl::Copy &copy = *impl_->copies.back().second;
        PetscInt    n    = 0;
        ALLOYSPEC_CHECK(MatGetSize(K, &n, nullptr));
        // Contiguous blocks of rows, the first n mod size ranks one row more.
        const PetscInt size = PetscInt(impl_->size), rank = PetscInt(impl_->rank);
        const PetscInt base = n / size, extra = n % size;
        copy.first = rank * base + std::min(rank, extra);
        copy.last  = copy.first + base + (rank < extra ? 1 : 0);
        std::vector<PetscInt> diagonal, off_diagonal;
        for (PetscInt i = copy.first; i < copy.last; ++i)
          {
            PetscInt        nc   = 0;
            const PetscInt *cols = nullptr;
            ALLOYSPEC_CHECK(MatGetRow(K, i, &nc, &cols, nullptr));
            PetscInt inside = 0;
            for (PetscInt j = 0; j < nc; ++j)
              inside += (cols[j] >= copy.first && cols[j] < copy.last) ? 1 : 0;
            diagonal.push_back(inside);
            off_diagonal.push_back(nc - inside);
            ALLOYSPEC_CHECK(MatRestoreRow(K, i, &nc, &cols, nullptr));
          }
        // K and M share their pattern (SpectralProblem), so one preallocation serves both.
        for (internal::OwnedMat *target : {std::addressof(copy.K), std::addressof(copy.M)})
          {
            ALLOYSPEC_CHECK(MatCreateAIJ(impl_->comm, copy.last - copy.first,
                                         copy.last - copy.first, n, n, 0, diagonal.data(), 0,
                                         off_diagonal.data(), &*target));
            ALLOYSPEC_CHECK(MatSetOption(*target, MAT_NEW_NONZERO_ALLOCATION_ERR, PETSC_TRUE));
            ALLOYSPEC_CHECK(MatSetOption(*target, MAT_SYMMETRIC, PETSC_TRUE));
          }
        copy_rows(M, copy.M, copy.first, copy.last);
        found = impl_->copies.end() - 1;
      }
    Impl::Copy &copy = *found->second;
    copy_rows(K, copy.K, copy.first, copy.last);
    return {copy.K, copy.M};
  }
} // namespace alloyspec
