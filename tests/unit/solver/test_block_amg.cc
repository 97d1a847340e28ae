// BlockAmg: one V-cycle of MueLu applied to blocks of any width. The cycle is a
// fixed linear operator T, so a block must give, column by column, what each
// column gives alone (the chunking into cycles of 13 and the zero padding of
// the last chunk must not leak between columns); T of smoothed aggregation
// with a symmetric smoother and Galerkin coarse levels is symmetric; and a
// V-cycle whose smoother converges contracts the error in the energy norm
// (Trottenberg, Oosterlee & Schüller, Multigrid, Academic Press 2001, ch. 2).
#include "block_amg.h"

#include <gtest/gtest.h>
#include <petscmat.h>

#include <Eigen/Dense>

#include <cmath>
#include <random>

namespace
{
  /** Agreement of a linear map applied two ways: rounding only. */
  constexpr double linear_tolerance = 1e-12;
  /** Symmetry of T: rounding in a cycle of a few levels. */
  constexpr double symmetry_tolerance = 1e-10;

  constexpr PetscInt side = 12, n = side * side * side;

  /** K = 7-point Laplacian on a side³ grid with Dirichlet ends plus a random diagonal; M = I, same pattern. */
  void make_pair(Mat *K, Mat *M)
  {
    MatCreateSeqAIJ(PETSC_COMM_SELF, n, n, 7, nullptr, K);
    MatCreateSeqAIJ(PETSC_COMM_SELF, n, n, 7, nullptr, M);
    std::mt19937                           rng(7);
    std::uniform_real_distribution<double> potential(0.0, 2.0);
    for (PetscInt z = 0; z < side; ++z)
      for (PetscInt y = 0; y < side; ++y)
        for (PetscInt x = 0; x < side; ++x)
          {
            const PetscInt i = x + side * (y + side * z);
            PetscInt       cols[7];
            double         k[7], m[7];
            int            c = 0;
            cols[c] = i, k[c] = 6.0 + potential(rng), m[c] = 1.0, ++c;
            const PetscInt steps[3] = {1, side, side * side};
            const PetscInt coord[3] = {x, y, z};
            for (int d = 0; d < 3; ++d)
              {
                if (coord[d] > 0)
                  cols[c] = i - steps[d], k[c] = -1.0, m[c] = 0.0, ++c;
                if (coord[d] < side - 1)
                  cols[c] = i + steps[d], k[c] = -1.0, m[c] = 0.0, ++c;
              }
            MatSetValues(*K, 1, &i, c, cols, k, INSERT_VALUES);
            MatSetValues(*M, 1, &i, c, cols, m, INSERT_VALUES);
          }
    for (Mat *A : {K, M})
      {
        MatAssemblyBegin(*A, MAT_FINAL_ASSEMBLY);
        MatAssemblyEnd(*A, MAT_FINAL_ASSEMBLY);
      }
  }

  Eigen::MatrixXd apply(const alloyspec::internal::BlockAmg &amg, const Eigen::MatrixXd &in)
  {
    Eigen::MatrixXd out(in.rows(), in.cols());
    amg.apply(in.data(), out.data(), static_cast<unsigned int>(in.cols()));
    return out;
  }
} // namespace

TEST(BlockAmg, ABlockOfAnyWidthGivesEachColumnAlone)
{
  Mat K, M;
  make_pair(&K, &M);
  alloyspec::internal::BlockAmg amg;
  amg.setup(K, M, 0.0);
  for (const int width : {1, 5, 13, 14, 27})
    {
      const Eigen::MatrixXd x     = Eigen::MatrixXd::Random(n, width);
      const Eigen::MatrixXd block = apply(amg, x);
      for (int j = 0; j < width; ++j)
        {
          const Eigen::VectorXd alone = apply(amg, x.col(j));
          EXPECT_LE((block.col(j) - alone).norm(), linear_tolerance * alone.norm()) << "width " << width;
        }
    }
  MatDestroy(&K);
  MatDestroy(&M);
}

TEST(BlockAmg, TheCycleIsSymmetricAndContractsInTheEnergyNorm)
{
  Mat K, M;
  make_pair(&K, &M);
  alloyspec::internal::BlockAmg amg;
  amg.setup(K, M, 0.0);
  const Eigen::MatrixXd uv = Eigen::MatrixXd::Random(n, 2);
  const Eigen::MatrixXd t  = apply(amg, uv);
  const double          a = uv.col(0).dot(t.col(1)), b = uv.col(1).dot(t.col(0));
  EXPECT_LE(std::abs(a - b), symmetry_tolerance * std::abs(a));

  // Error propagation of one preconditioned Richardson step: e ← e − T K e.
  Vec             in, out;
  Eigen::VectorXd e = uv.col(0), ke(n);
  VecCreateSeqWithArray(PETSC_COMM_SELF, 1, n, e.data(), &in);
  VecCreateSeqWithArray(PETSC_COMM_SELF, 1, n, ke.data(), &out);
  MatMult(K, in, out);
  const double          before = std::sqrt(e.dot(ke));
  const Eigen::VectorXd next   = e - apply(amg, ke);
  Eigen::VectorXd       k_next(n);
  VecPlaceArray(in, next.data());
  VecPlaceArray(out, k_next.data());
  MatMult(K, in, out);
  VecResetArray(in);
  VecResetArray(out);
  const double after = std::sqrt(next.dot(k_next));
  EXPECT_LT(after, before);
  VecDestroy(&in);
  VecDestroy(&out);
  MatDestroy(&K);
  MatDestroy(&M);
}
