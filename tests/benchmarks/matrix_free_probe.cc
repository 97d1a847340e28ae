// matrix_free_probe: the product of the iterative path's operator with a block of
// vectors, stored against matrix-free, side by side on the same mesh.
//
// The operator is K + V M of -Δ + V on an L³ box of unit cells, Q_p elements, one
// per cell, V constant on each cell (invented values), with natural boundary
// conditions so that both forms hold every node. Stored: a PETSc AIJ matrix times
// a dense block of b columns (PETSc's MatMatMult, which the iterative solver used
// until its own block product, block_product.h, read the matrix once per block and
// ran about 3.8 times faster at L = 32: stored matrices now win by more than this
// probe shows). Matrix-free: deal.II's MatrixFree with sum factorisation,
// applied to the b columns one by one. Both results must agree to rounding.
//
// Usage: matrix_free_probe L p b repeats. Prints one JSON object.
#include <deal.II/base/index_set.h>
#include <deal.II/base/quadrature_lib.h>
#include <deal.II/base/vectorization.h>
#include <deal.II/dofs/dof_handler.h>
#include <deal.II/dofs/dof_tools.h>
#include <deal.II/fe/fe_q.h>
#include <deal.II/fe/fe_values.h>
#include <deal.II/fe/mapping_q1.h>
#include <deal.II/grid/grid_generator.h>
#include <deal.II/grid/tria.h>
#include <deal.II/lac/affine_constraints.h>
#include <deal.II/lac/dynamic_sparsity_pattern.h>
#include <deal.II/lac/full_matrix.h>
#include <deal.II/lac/la_parallel_vector.h>
#include <deal.II/lac/petsc_sparse_matrix.h>
#include <deal.II/lac/sparsity_pattern.h>
#include <deal.II/matrix_free/fe_evaluation.h>
#include <deal.II/matrix_free/matrix_free.h>

#include <petscmat.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <functional>
#include <vector>

namespace
{
  constexpr int dim = 3;
  using Vector      = dealii::LinearAlgebra::distributed::Vector<double>;

  double seconds_since(std::chrono::steady_clock::time_point start)
  {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }

  /** Invented cell values in [0, 2): a fixed sequence, not a law of the project. */
  double cell_value(unsigned int index) { return 2.0 * std::fmod(0.6180339887 * (index + 1), 1.0); }

  template <int degree>
  int run(unsigned int L, unsigned int b, unsigned int repeats)
  {
    dealii::Triangulation<dim> tria;
    dealii::GridGenerator::subdivided_hyper_cube(tria, L, 0.0, double(L));
    const dealii::FE_Q<dim> fe(degree);
    dealii::DoFHandler<dim> dofs(tria);
    dofs.distribute_dofs(fe);
    const unsigned int n = dofs.n_dofs();

    // Stored: K + V M assembled into a PETSc matrix (as the solver's own path).
    dealii::DynamicSparsityPattern pattern(n, n);
    dealii::DoFTools::make_sparsity_pattern(dofs, pattern);
    dealii::SparsityPattern sparsity;
    sparsity.copy_from(pattern);
    dealii::PETScWrappers::SparseMatrix A(sparsity);
    {
      const dealii::QGauss<dim>   quadrature(degree + 1);
      dealii::FEValues<dim>       values(fe, quadrature,
                                   dealii::update_values | dealii::update_gradients |
                                     dealii::update_JxW_values);
      const unsigned int          k = fe.n_dofs_per_cell();
      dealii::FullMatrix<double>  local(k, k);
      std::vector<dealii::types::global_dof_index> indices(k);
      for (const auto &cell : dofs.active_cell_iterators())
        {
          values.reinit(cell);
          local        = 0;
          const double v = cell_value(cell->active_cell_index());
          for (unsigned int q = 0; q < quadrature.size(); ++q)
            for (unsigned int i = 0; i < k; ++i)
              for (unsigned int j = 0; j < k; ++j)
                local(i, j) += (values.shape_grad(i, q) * values.shape_grad(j, q) +
                                v * values.shape_value(i, q) * values.shape_value(j, q)) *
                               values.JxW(q);
          cell->get_dof_indices(indices);
          A.add(indices, local);
        }
      A.compress(dealii::VectorOperation::add);
    }

    // Matrix-free: the same form by sum factorisation, V per cell of each batch.
    dealii::AffineConstraints<double> none;
    none.close();
    typename dealii::MatrixFree<dim, double>::AdditionalData data;
    data.tasks_parallel_scheme = dealii::MatrixFree<dim, double>::AdditionalData::none;
    data.mapping_update_flags  = dealii::update_values | dealii::update_gradients |
                                dealii::update_JxW_values;
    dealii::MatrixFree<dim, double> mf;
    mf.reinit(dealii::MappingQ1<dim>(), dofs, none, dealii::QGauss<1>(degree + 1), data);
    using Cells = dealii::VectorizedArray<double>;
    std::vector<Cells> potential(mf.n_cell_batches());
    for (unsigned int batch = 0; batch < mf.n_cell_batches(); ++batch)
      for (unsigned int lane = 0; lane < mf.n_active_entries_per_cell_batch(batch); ++lane)
        potential[batch][lane] = cell_value(mf.get_cell_iterator(batch, lane)->active_cell_index());
    using CellWork = std::function<void(const dealii::MatrixFree<dim, double> &, Vector &, const Vector &,
                                        const std::pair<unsigned int, unsigned int> &)>;
    const CellWork cells = [&](const dealii::MatrixFree<dim, double> &m, Vector &out, const Vector &in,
                           const std::pair<unsigned int, unsigned int> &range) {
      dealii::FEEvaluation<dim, degree, degree + 1, 1, double> phi(m);
      for (unsigned int batch = range.first; batch < range.second; ++batch)
        {
          phi.reinit(batch);
          phi.gather_evaluate(in, dealii::EvaluationFlags::values | dealii::EvaluationFlags::gradients);
          for (unsigned int q = 0; q < phi.n_q_points; ++q)
            {
              phi.submit_gradient(phi.get_gradient(q), q);
              phi.submit_value(potential[batch] * phi.get_value(q), q);
            }
          phi.integrate_scatter(dealii::EvaluationFlags::values | dealii::EvaluationFlags::gradients, out);
        }
    };
    const auto apply = [&](Vector &dst, const Vector &src) { mf.cell_loop(cells, dst, src, true); };

    // A block of b columns (column-major), as the solver holds it.
    std::vector<double> block(std::size_t(n) * b), stored(std::size_t(n) * b), free(std::size_t(n) * b);
    for (std::size_t i = 0; i < block.size(); ++i)
      block[i] = std::sin(0.37 * double(i) + 0.11);
    Vector src, dst;
    mf.initialize_dof_vector(src);
    mf.initialize_dof_vector(dst);

    double best_stored = 1e300, best_free = 1e300;
    for (unsigned int rep = 0; rep < repeats; ++rep)
      {
        auto start = std::chrono::steady_clock::now();
        Mat  dense = nullptr, image = nullptr;
        MatCreateSeqDense(PETSC_COMM_SELF, PetscInt(n), PetscInt(b), block.data(), &dense);
        MatMatMult(A, dense, MAT_INITIAL_MATRIX, PETSC_DEFAULT, &image);
        const PetscScalar *out = nullptr;
        MatDenseGetArrayRead(image, &out);
        std::copy(out, out + stored.size(), stored.begin());
        MatDenseRestoreArrayRead(image, &out);
        MatDestroy(&image);
        MatDestroy(&dense);
        best_stored = std::min(best_stored, seconds_since(start));

        start = std::chrono::steady_clock::now();
        for (unsigned int c = 0; c < b; ++c)
          {
            std::copy(block.begin() + std::size_t(c) * n, block.begin() + std::size_t(c + 1) * n,
                      src.begin());
            apply(dst, src);
            std::copy(dst.begin(), dst.end(), free.begin() + std::size_t(c) * n);
          }
        best_free = std::min(best_free, seconds_since(start));
      }
    double difference = 0, size = 0;
    for (std::size_t i = 0; i < stored.size(); ++i)
      difference = std::max(difference, std::abs(stored[i] - free[i])),
      size       = std::max(size, std::abs(stored[i]));
    MatInfo info{};
    MatGetInfo(A, MAT_LOCAL, &info);
    std::printf("{\"L\": %u, \"degree\": %d, \"unknowns\": %u, \"columns\": %u, \"stored_entries\": %.0f, "
                "\"stored_seconds\": %.6g, \"matrix_free_seconds\": %.6g, \"vectorised_lanes\": %u, "
                "\"largest_relative_difference\": %.3g}\n",
                L, degree, n, b, info.nz_used, best_stored, best_free, unsigned(Cells::size()),
                difference / size);
    return difference <= 1e-10 * size ? 0 : 1;
  }
} // namespace

int main(int argc, char **argv)
{
  PetscInitialize(&argc, &argv, nullptr, nullptr);
  if (argc < 5)
    {
      std::fprintf(stderr, "usage: matrix_free_probe L p b repeats\n");
      return 2;
    }
  const unsigned int L = std::atoi(argv[1]), p = std::atoi(argv[2]), b = std::atoi(argv[3]),
                     repeats = std::atoi(argv[4]);
  int status = 2;
  if (p == 1)
    status = run<1>(L, b, repeats);
  else if (p == 2)
    status = run<2>(L, b, repeats);
  else if (p == 3)
    status = run<3>(L, b, repeats);
  else
    std::fprintf(stderr, "matrix_free_probe: degree %u not built (allowed: 1, 2, 3)\n", p);
  PetscFinalize();
  return status;
}
