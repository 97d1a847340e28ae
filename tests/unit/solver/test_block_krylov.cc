// Block shift-and-invert Krylov–Schur against closed-form spectra of
// finite-element pencils (dense reference operators built here with Eigen).
#include <alloyspec/solver/block_krylov.h>

#include <Eigen/Dense>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <vector>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;
    // The Ritz values converge to tolerance 1e-12 in θ = 1/(λ − σ); with
    // λ ≲ 1e4 here that is ≲ 1e-10 relative in λ.
    constexpr double eigenvalue_tolerance = 1e-10;
    // ‖T x − θ x‖_M ≤ 1e-12 |θ| as requested, measured with the dense T.
    constexpr double residual_tolerance = 1e-11;
    constexpr double orthonormality_tolerance = 1e-12;

    /**
     * Linear elements on a uniform mesh of (0, 1) with Dirichlet ends,
     * n interior nodes: K = tridiag(−1, 2, −1)/h, M = h tridiag(1, 4, 1)/6.
     */
    void linear_elements(int n, Eigen::MatrixXd &K, Eigen::MatrixXd &M)
    {
      const double h = 1.0 / (n + 1);
      K = Eigen::MatrixXd::Zero(n, n);
      M = Eigen::MatrixXd::Zero(n, n);
      for (int i = 0; i < n; ++i)
        {
          K(i, i) = 2 / h;
          M(i, i) = 4 * h / 6;
          if (i + 1 < n)
            {
              K(i, i + 1) = K(i + 1, i) = -1 / h;
              M(i, i + 1) = M(i + 1, i) = h / 6;
            }
        }
    }

    /**
     * Closed form for that pencil: the eigenvectors are sin(jπx_i), so
     * λ_j = 6(1 − cos jπh) / (h²(2 + cos jπh)) (Toeplitz tridiagonal
     * matrices share these eigenvectors; Strang & Fix 1973 §6.1 — from memory).
     */
    double linear_element_eigenvalue(int n, int j)
    {
      const double h = 1.0 / (n + 1), c = std::cos(j * pi * h);
      return 6 * (1 - c) / (h * h * (2 + c));
    }

    struct DenseOperator
    {
      Eigen::MatrixXd          K, M;
      double                   sigma = 0;
      Eigen::LDLT<Eigen::MatrixXd> factor;

      BlockOperator op()
      {
        factor.compute(K - sigma * M);
        BlockOperator o;
        o.n_local = static_cast<std::size_t>(K.rows());
        const Eigen::Index n = K.rows();
        o.solve = [this, n](const double *in, double *out, unsigned int b) {
          Eigen::Map<const Eigen::MatrixXd> x(in, n, b);
          Eigen::Map<Eigen::MatrixXd>(out, n, b) = factor.solve(x);
        };
        o.mass = [this, n](const double *in, double *out, unsigned int b) {
          Eigen::Map<const Eigen::MatrixXd> x(in, n, b);
          Eigen::Map<Eigen::MatrixXd>(out, n, b) = M * x;
        };
        return o;
      }
    };

    void check_pairs(DenseOperator &d, const BlockKrylovResult &r, const std::vector<double> &exact)
    {
      const Eigen::Index n = d.K.rows();
      ASSERT_TRUE(r.converged);
      ASSERT_EQ(r.theta.size(), exact.size());
      std::vector<double> lambda;
      for (const double t : r.theta)
        lambda.push_back(d.sigma + 1 / t);
      for (std::size_t j = 1; j < lambda.size(); ++j)
        EXPECT_LE(lambda[j - 1], lambda[j] * (1 + 1e-14)) << "not in ascending order at " << j;
      for (std::size_t j = 0; j < exact.size(); ++j)
        EXPECT_NEAR(lambda[j], exact[j], eigenvalue_tolerance * exact[j]) << "eigenvalue " << j;
      Eigen::Map<const Eigen::MatrixXd> X(r.vectors.data(), n, Eigen::Index(exact.size()));
      const Eigen::MatrixXd gram = X.transpose() * d.M * X;
      EXPECT_LT((gram - Eigen::MatrixXd::Identity(gram.rows(), gram.cols())).cwiseAbs().maxCoeff(),
                orthonormality_tolerance);
      const Eigen::MatrixXd TX = d.factor.solve(d.M * X);
      for (std::size_t j = 0; j < exact.size(); ++j)
        {
          const Eigen::VectorXd res = TX.col(Eigen::Index(j)) - r.theta[j] * X.col(Eigen::Index(j));
          EXPECT_LT(std::sqrt(res.dot(d.M * res)), residual_tolerance * r.theta[j]) << "pair " << j;
        }
    }
  } // namespace

  TEST(BlockKrylovSchur, LinearElementsIn1DMatchTheClosedForm)
  {
    const int     n = 600;
    DenseOperator d;
    linear_elements(n, d.K, d.M);
    d.sigma = -1.0;
    BlockKrylovSettings s;
    s.n_wanted   = 40;
    s.block_size = 8;
    // A small basis forces several thick restarts.
    s.max_basis = 64;
    const BlockKrylovResult r = block_krylov_schur(d.op(), s);
    EXPECT_GT(r.restarts, 1u);
    std::vector<double> exact;
    for (int j = 1; j <= 40; ++j)
      exact.push_back(linear_element_eigenvalue(n, j));
    check_pairs(d, r, exact);
  }

  // Tensor-product pencil on the square: eigenvalues λ_i + λ_j, double for
  // i ≠ j. A block method must return both copies of every pair.
  TEST(BlockKrylovSchur, MultiplicitiesOfTheSquareAreKept)
  {
    const int       m = 30;
    Eigen::MatrixXd K1, M1;
    linear_elements(m, K1, M1);
    DenseOperator d;
    const int     n = m * m;
    d.K.resize(n, n);
    d.M.resize(n, n);
    for (int a = 0; a < m; ++a)
      for (int b = 0; b < m; ++b)
        for (int c = 0; c < m; ++c)
          for (int e = 0; e < m; ++e)
            {
              d.K(a * m + b, c * m + e) = K1(a, c) * M1(b, e) + M1(a, c) * K1(b, e);
              d.M(a * m + b, c * m + e) = M1(a, c) * M1(b, e);
            }
    d.sigma = 0.0;
    std::vector<double> all;
    for (int i = 1; i <= m; ++i)
      for (int j = 1; j <= m; ++j)
        all.push_back(linear_element_eigenvalue(m, i) + linear_element_eigenvalue(m, j));
    std::sort(all.begin(), all.end());
    // Stop inside no cluster: 31 includes both copies of each value below.
    std::size_t wanted = 31;
    while (std::abs(all[wanted] - all[wanted - 1]) < 1e-9 * all[wanted])
      ++wanted;
    BlockKrylovSettings s;
    s.n_wanted   = static_cast<unsigned int>(wanted);
    s.block_size = 4;
    const BlockKrylovResult r = block_krylov_schur(d.op(), s);
    check_pairs(d, r, std::vector<double>(all.begin(), all.begin() + wanted));
  }

  // The band-edge mode: σ = a cut inside the spectrum, the operator negated,
  // −T = (σM − K)⁻¹M, whose positive eigenvalues 1/(σ − λ) are exactly those
  // with λ < σ. The wanted number (here from the closed form; in the solver
  // from the inertia of the same factor) of largest ones must be all the
  // eigenvalues below the cut, M-orthonormal, with the requested residual.
  TEST(BlockKrylovSchur, NegatedOperatorAtACutFindsEverythingBelowIt)
  {
    const int     n = 400;
    DenseOperator d;
    linear_elements(n, d.K, d.M);
    std::vector<double> below;
    // Halfway between the 6th and 7th eigenvalue.
    d.sigma = 0.5 * (linear_element_eigenvalue(n, 6) + linear_element_eigenvalue(n, 7));
    for (int j = 1; linear_element_eigenvalue(n, j) < d.sigma; ++j)
      below.push_back(linear_element_eigenvalue(n, j));
    ASSERT_EQ(below.size(), 6u);
    BlockOperator op = d.op();
    const auto    solve = op.solve;
    op.solve = [solve, n](const double *in, double *out, unsigned int b) {
      solve(in, out, b);
      for (std::size_t i = 0; i < std::size_t(n) * b; ++i)
        out[i] = -out[i];
    };
    BlockKrylovSettings s;
    s.n_wanted   = static_cast<unsigned int>(below.size());
    s.block_size = 4;
    const BlockKrylovResult r = block_krylov_schur(op, s);
    ASSERT_TRUE(r.converged);
    ASSERT_EQ(r.theta.size(), below.size());
    Eigen::Map<const Eigen::MatrixXd> X(r.vectors.data(), n, Eigen::Index(below.size()));
    const Eigen::MatrixXd gram = X.transpose() * d.M * X;
    EXPECT_LT((gram - Eigen::MatrixXd::Identity(gram.rows(), gram.cols())).cwiseAbs().maxCoeff(),
              orthonormality_tolerance);
    std::vector<double> lambda;
    for (const double t : r.theta)
      {
        EXPECT_GT(t, 0.0);
        lambda.push_back(d.sigma - 1 / t);
      }
    // Largest 1/(σ − λ) first: the eigenvalue nearest the cut first.
    std::sort(lambda.begin(), lambda.end());
    for (std::size_t j = 0; j < below.size(); ++j)
      EXPECT_NEAR(lambda[j], below[j], eigenvalue_tolerance * below[j]) << "eigenvalue " << j;
    const Eigen::MatrixXd TX = -Eigen::MatrixXd(d.factor.solve(d.M * X));
    for (std::size_t j = 0; j < below.size(); ++j)
      {
        const Eigen::VectorXd res = TX.col(Eigen::Index(j)) - r.theta[j] * X.col(Eigen::Index(j));
        EXPECT_LT(std::sqrt(res.dot(d.M * res)), residual_tolerance * r.theta[j]) << "pair " << j;
      }
  }

  TEST(BlockKrylovSchur, RefusesAProblemTooSmallForItsBasis)
  {
    DenseOperator d;
    linear_elements(20, d.K, d.M);
    BlockKrylovSettings s;
    s.n_wanted   = 10;
    s.block_size = 8;
    EXPECT_THROW(block_krylov_schur(d.op(), s), std::invalid_argument);
  }

  // The start block depends on (seed, global row, column) only: two halves
  // of the rows see the same numbers as the whole. Checked through the
  // result: same seed, same Ritz values to rounding.
  TEST(BlockKrylovSchur, SameSeedSameResult)
  {
    DenseOperator d;
    linear_elements(300, d.K, d.M);
    d.sigma = -1.0;
    BlockKrylovSettings s;
    s.n_wanted   = 12;
    s.block_size = 4;
    const BlockKrylovResult a = block_krylov_schur(d.op(), s);
    const BlockKrylovResult b = block_krylov_schur(d.op(), s);
    ASSERT_EQ(a.theta.size(), b.theta.size());
    for (std::size_t j = 0; j < a.theta.size(); ++j)
      EXPECT_EQ(a.theta[j], b.theta[j]);
  }
} // namespace alloyspec
