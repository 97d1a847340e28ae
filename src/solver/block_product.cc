#include "block_product.h"

#include <petscis.h>

#include <Eigen/Core>
#include <Eigen/SparseCore>

#include <mpi.h>

#include <stdexcept>

namespace alloyspec::internal
{
  namespace
  {
    using RowBlock = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
    using CsrView  = Eigen::Map<const Eigen::SparseMatrix<double, Eigen::RowMajor, PetscInt>>;

    /** The compressed rows of a SeqAIJ matrix, borrowed for the lifetime of one call. */
    class BorrowedRows
    {
    public:
      explicit BorrowedRows(Mat a)
        : a_(a)
      {
        PetscBool done = PETSC_FALSE;
        ALLOYSPEC_CHECK(MatGetRowIJ(a_, 0, PETSC_FALSE, PETSC_FALSE, &rows_, &starts_, &columns_, &done));
        if (!done)
          throw std::runtime_error("block product: the matrix does not expose its compressed rows");
        ALLOYSPEC_CHECK(MatGetSize(a_, nullptr, &n_columns_));
        ALLOYSPEC_CHECK(MatSeqAIJGetArrayRead(a_, &values_));
      }
      ~BorrowedRows()
      {
        MatSeqAIJRestoreArrayRead(a_, &values_);
        PetscBool done = PETSC_FALSE;
        MatRestoreRowIJ(a_, 0, PETSC_FALSE, PETSC_FALSE, &rows_, &starts_, &columns_, &done);
      }
      BorrowedRows(const BorrowedRows &)            = delete;
      BorrowedRows &operator=(const BorrowedRows &) = delete;

      CsrView view() const
      {
        return CsrView(rows_, n_columns_, starts_[rows_], starts_, columns_, values_);
      }

    private:
      Mat                a_;
      PetscInt           rows_ = 0, n_columns_ = 0;
      const PetscInt    *starts_ = nullptr, *columns_ = nullptr;
      const PetscScalar *values_ = nullptr;
    };
  } // namespace

  BlockProduct::BlockProduct(Mat A)
    : a_(A)
  {
    PetscBool seq = PETSC_FALSE, mpi = PETSC_FALSE;
    ALLOYSPEC_CHECK(PetscObjectTypeCompare(reinterpret_cast<PetscObject>(A), MATSEQAIJ, &seq));
    ALLOYSPEC_CHECK(PetscObjectTypeCompare(reinterpret_cast<PetscObject>(A), MATMPIAIJ, &mpi));
    if (seq)
      owned_ = A;
    else if (mpi)
      {
        ALLOYSPEC_CHECK(MatMPIAIJGetSeqAIJ(A, &owned_, &ghost_, &ghost_columns_));
        ALLOYSPEC_CHECK(MatGetSize(ghost_, nullptr, &n_ghost_));
        team_ = true;
      }
    else
      throw std::runtime_error("block product: the matrix is neither SeqAIJ nor MPIAIJ");
    ALLOYSPEC_CHECK(MatGetLocalSize(A, &n_local_, nullptr));
  }

  BlockProduct::~BlockProduct() = default;

  void BlockProduct::operator()(const double *in, double *out, const unsigned int b) const
  {
    const auto n = static_cast<Eigen::Index>(n_local_);
    x_.resize(std::size_t(n) * b);
    y_.resize(std::size_t(n) * b);
    Eigen::Map<RowBlock> x(x_.data(), n, b), y(y_.data(), n, b);
    x = Eigen::Map<const Eigen::MatrixXd>(in, n, b);
    {
      const BorrowedRows rows(owned_);
      y.noalias() = rows.view() * x;
    }
    if (team_)
      {
        // Every rank joins the scatter, with or without ghost rows of its own.
        MPI_Comm comm = MPI_COMM_NULL;
        ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(a_), &comm));
        g_.resize(std::size_t(n_ghost_) * b);
        OwnedVec source, ghosts;
        ALLOYSPEC_CHECK(VecCreateMPIWithArray(comm, PetscInt(b), n_local_ * PetscInt(b), PETSC_DECIDE,
                                              x_.data(), &source));
        ALLOYSPEC_CHECK(VecCreateSeqWithArray(PETSC_COMM_SELF, PetscInt(b), n_ghost_ * PetscInt(b),
                                              g_.data(), &ghosts));
        OwnedScatter &scatter = scatters_[b];
        if (!scatter)
          {
            PetscHandle<IS, ISDestroy> which;
            ALLOYSPEC_CHECK(ISCreateBlock(PETSC_COMM_SELF, PetscInt(b), n_ghost_, ghost_columns_,
                                          PETSC_COPY_VALUES, &which));
            ALLOYSPEC_CHECK(VecScatterCreate(source, which, ghosts, nullptr, &scatter));
          }
        ALLOYSPEC_CHECK(VecScatterBegin(scatter, source, ghosts, INSERT_VALUES, SCATTER_FORWARD));
        ALLOYSPEC_CHECK(VecScatterEnd(scatter, source, ghosts, INSERT_VALUES, SCATTER_FORWARD));
        if (n_ghost_ > 0)
          {
            const BorrowedRows rows(ghost_);
            y.noalias() += rows.view() * Eigen::Map<const RowBlock>(g_.data(), n_ghost_, b);
          }
      }
    Eigen::Map<Eigen::MatrixXd>(out, n, b) = y;
  }
} // namespace alloyspec::internal
