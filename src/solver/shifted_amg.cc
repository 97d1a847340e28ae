#include "petsc_handle.h"
#include "shifted_amg.h"
#include "shifted_rows.h"

#include <deal.II/base/index_set.h>
#include <deal.II/lac/trilinos_precondition.h>
#include <deal.II/lac/trilinos_sparse_matrix.h>
#include <deal.II/lac/trilinos_sparsity_pattern.h>
#include <deal.II/lac/trilinos_vector.h>

#include <chrono>
#include <cstring>
#include <stdexcept>
#include <vector>

namespace alloyspec::internal
{
  struct ShiftedAmg::Impl
  {
    dealii::TrilinosWrappers::SparseMatrix         shifted;
    dealii::TrilinosWrappers::PreconditionAMG      amg;
    mutable dealii::TrilinosWrappers::MPI::Vector  in, out;
    PetscInt64                                     k_id    = -1;
    PetscObjectState                               pattern = 0;
    PetscInt                                       first = 0, last = 0;
    double                                         setup_seconds = 0;
  };

  ShiftedAmg::ShiftedAmg()
    : impl_(std::make_unique<Impl>())
  {}
  ShiftedAmg::~ShiftedAmg() = default;

  void ShiftedAmg::setup(Mat K, Mat M, const double sigma)
  {
    const auto start = std::chrono::steady_clock::now();
    Impl      &s     = *impl_;
    MPI_Comm   comm  = MPI_COMM_NULL;
    ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(K), &comm));
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(K), &k_id));
    ALLOYSPEC_CHECK(MatGetNonzeroState(K, &pattern));
    PetscInt n = 0;
    ALLOYSPEC_CHECK(MatGetSize(K, &n, nullptr));
    ALLOYSPEC_CHECK(MatGetOwnershipRange(K, &s.first, &s.last));

    std::vector<dealii::types::global_dof_index> columns;
    if (k_id != s.k_id || pattern != s.pattern)
      {
        dealii::IndexSet owned(static_cast<dealii::types::global_dof_index>(n));
        owned.add_range(static_cast<dealii::types::global_dof_index>(s.first),
                        static_cast<dealii::types::global_dof_index>(s.last));
        owned.compress();
        dealii::TrilinosWrappers::SparsityPattern sparsity(owned, owned, comm);
        for (PetscInt i = s.first; i < s.last; ++i)
          {
            PetscInt        nc   = 0;
            const PetscInt *cols = nullptr;
            ALLOYSPEC_CHECK(MatGetRow(K, i, &nc, &cols, nullptr));
            columns.assign(cols, cols + nc);
            ALLOYSPEC_CHECK(MatRestoreRow(K, i, &nc, &cols, nullptr));
            sparsity.add_entries(static_cast<dealii::types::global_dof_index>(i), columns.begin(),
                                 columns.end(), true);
          }
        sparsity.compress();
        s.shifted.reinit(sparsity);
        s.in.reinit(owned, comm);
        s.out.reinit(owned, comm);
        s.k_id    = k_id;
        s.pattern = pattern;
      }
    for_each_shifted_row(K, M, sigma,
                         [&](PetscInt i, const std::vector<PetscInt> &row, const std::vector<double> &values) {
                           columns.assign(row.begin(), row.end());
                           s.shifted.set(static_cast<dealii::types::global_dof_index>(i), columns.size(),
                                         columns.data(), values.data(), false);
                         });
    s.shifted.compress(dealii::VectorOperation::insert);

    dealii::TrilinosWrappers::PreconditionAMG::AdditionalData data;
    // Smoothed aggregation for an elliptic operator; ML's defaults otherwise
    // (one V-cycle, Chebyshev smoother). One smoother sweep, not two: the
    // cheaper cycle gave the faster solve overall (iterations not counted). Measured,
    // L = 24, Q2, k = 20, enclosures, seconds per realisation: sweeps 2:
    // 78.8 and 79.1; 1: 68.1 and 71.6; 3: 90.1. The aggregation threshold
    // was measured too (1 sweep): 0.02 best; 0.05 77.6 s, 0.1 158.0 s;
    // (2 sweeps) 0 120.4 s, 1e-4 124.4 s.
    data.elliptic              = true;
    data.higher_order_elements = true;
    data.smoother_sweeps       = 1;
    data.aggregation_threshold = 0.02;
    s.amg.initialize(s.shifted, data);
    s.setup_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }

  void ShiftedAmg::apply(const double *in, double *out, const unsigned int columns) const
  {
    Impl             &s = *impl_;
    const std::size_t n = static_cast<std::size_t>(s.last - s.first);
    for (unsigned int j = 0; j < columns; ++j)
      {
        std::memcpy(s.in.begin(), in + j * n, sizeof(double) * n);
        s.amg.vmult(s.out, s.in);
        std::memcpy(out + j * n, s.out.begin(), sizeof(double) * n);
      }
  }

  double ShiftedAmg::last_setup_seconds() const { return impl_->setup_seconds; }

  std::size_t ShiftedAmg::matrix_bytes() const { return impl_->shifted.memory_consumption(); }
} // namespace alloyspec::internal
