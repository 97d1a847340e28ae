#include "block_product.h"

#include <petscis.h>

#include <Eigen/Core>
#include <Eigen/SparseCore>

#include <mpi.h>

#include <algorithm>
#include <optional>
#include <stdexcept>

namespace alloyspec::internal
{
  namespace
  {
    using RowBlock = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
    using CsrView  = Eigen::Map<const Eigen::SparseMatrix<double, Eigen::RowMajor, PetscInt>>;

    /** Rows of the image formed, and turned back to column-major, at a time (a slice of b columns stays in cache). */
    constexpr Eigen::Index row_slice = 512;

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
    // The row-major copy of the block is kept between calls: one block of
    // n × b beside a basis of hundreds of columns, and allocating it afresh
    // faulted its pages in on every product (perf, L = 12, k = 200).
    if (rows_scratch_.size() < std::size_t(n) * b)
      rows_scratch_.resize(std::size_t(n) * b);
    Eigen::Map<RowBlock> x(rows_scratch_.data(), n, b);
    x = Eigen::Map<const Eigen::MatrixXd>(in, n, b);
    RowBlock g;
    if (team_)
      {
        // Every rank joins the scatter, with or without ghost rows of its own.
        MPI_Comm comm = MPI_COMM_NULL;
        ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(a_), &comm));
        g.resize(n_ghost_, b);
        OwnedVec source, ghosts;
        ALLOYSPEC_CHECK(VecCreateMPIWithArray(comm, PetscInt(b), n_local_ * PetscInt(b), PETSC_DECIDE,
                                              x.data(), &source));
        ALLOYSPEC_CHECK(VecCreateSeqWithArray(PETSC_COMM_SELF, PetscInt(b), n_ghost_ * PetscInt(b),
                                              g.data(), &ghosts));
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
      }
    const BorrowedRows owned(owned_);
    const CsrView      a = owned.view();
    std::optional<BorrowedRows> ghost_rows;
    if (team_ && n_ghost_ > 0)
      ghost_rows.emplace(ghost_);
    if (b == 1)
      {
        // One column is the same in either storage order: no transposition,
        // and Eigen's sparse-times-vector kernel rather than its block one,
        // which at b = 1 took about twice as long (measured at 35,937
        // unknowns, Q2 mass matrix).
        Eigen::Map<Eigen::VectorXd> y(out, n);
        y.noalias() = a * x.col(0);
        if (ghost_rows)
          y.noalias() += ghost_rows->view() * g.col(0);
        return;
      }
    // The image a slice of rows at a time, turned back to column-major while
    // the slice is in cache (no second block of n × b).
    Eigen::Map<Eigen::MatrixXd> y(out, n, b);
    RowBlock                    slice(std::min(row_slice, n), b);
    for (Eigen::Index r0 = 0; r0 < n; r0 += row_slice)
      {
        const Eigen::Index h    = std::min(row_slice, n - r0);
        auto               part = slice.topRows(h);
        part.noalias()          = a.middleRows(r0, h) * x;
        if (ghost_rows)
          part.noalias() += ghost_rows->view().middleRows(r0, h) * g;
        y.middleRows(r0, h) = part;
      }
  }
} // namespace alloyspec::internal
