// Lehmann's eigenvalue bounds (eigen_enclosure.h) on a dense pencil whose
// eigenvalues are chosen, so the truth is known exactly: a cluster of two
// nearly equal eigenvalues and isolated ones, approximated by a perturbed
// block of eigenvectors.
#include <alloyspec/solver/eigen_enclosure.h>

#include <Eigen/Dense>
#include <gtest/gtest.h>

#include <random>

namespace alloyspec
{
  TEST(EigenEnclosure, LehmannBoundsContainChosenEigenvalues)
  {
    const Eigen::Index        n = 60, j = 6;
    std::mt19937              rng(11);
    std::normal_distribution<double> normal;
    const auto random = [&](Eigen::Index r, Eigen::Index c) {
      Eigen::MatrixXd a(r, c);
      for (Eigen::Index i = 0; i < a.size(); ++i)
        a.data()[i] = normal(rng);
      return a;
    };
    // M symmetric positive definite, not the identity (invented test data).
    const Eigen::MatrixXd g = random(n, n);
    const Eigen::MatrixXd m = Eigen::MatrixXd::Identity(n, n) + 0.01 * g * g.transpose();
    Eigen::VectorXd       lambda(n);
    lambda << 1.0, 2.0, 2.0 + 1e-9, 3.0, 4.0, 5.0;
    for (Eigen::Index i = j; i < n; ++i)
      lambda[i] = 6.0 + double(i);
    // V with VᵀMV = I and K V = M V Λ: V = M^{-1/2} Q.
    Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ms(m);
    const Eigen::MatrixXd m_inv_half = ms.operatorInverseSqrt();
    const Eigen::MatrixXd q = random(n, n).householderQr().householderQ();
    const Eigen::MatrixXd v = m_inv_half * q;
    const Eigen::MatrixXd k = m * v * lambda.asDiagonal() * v.transpose() * m;

    for (const double noise : {1e-3, 1e-6})
      {
        // A perturbed block, then Rayleigh–Ritz: M-orthonormal Ritz vectors, Xᵀ R = 0.
        const Eigen::MatrixXd x0 = v.leftCols(j) + noise * random(n, j);
        Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> ritz(
          x0.transpose() * k * x0, x0.transpose() * m * x0);
        const Eigen::MatrixXd x = x0 * ritz.eigenvectors();
        const Eigen::MatrixXd r = k * x - m * x * ritz.eigenvalues().asDiagonal();

        EnclosureInput in;
        in.theta.assign(ritz.eigenvalues().data(), ritz.eigenvalues().data() + j);
        const Eigen::MatrixXd rr = r.transpose() * r;
        in.residual_gram.assign(rr.data(), rr.data() + rr.size());
        in.mass_floor     = ms.eigenvalues().minCoeff();
        in.nu             = 0.5 * (lambda[j - 1] + lambda[j]); // λ_{j+1} ≥ ν holds
        in.spectrum_floor = 0.0;
        in.allowance.assign(std::size_t(j), 0.0);
        const Enclosures e = enclose(in);
        for (Eigen::Index i = 0; i < j; ++i)
          {
            // Exact up to rounding of the dense set-up (~1e-13 here).
            constexpr double rounding = 1e-12;
            EXPECT_LE(e.lower[std::size_t(i)], lambda[i] + rounding) << "noise " << noise << " pair " << i;
            EXPECT_GE(e.upper[std::size_t(i)], lambda[i] - rounding) << "noise " << noise << " pair " << i;
            // Quadratic in the residual: for the whole block the width is at
            // most about ‖R‖²_{M⁻¹}/(ν − θ_j) (the Temple form with the block's
            // residual, derived in eigen_enclosure.h); ‖R‖² ≤ tr(RᵀR). A factor
            // 2 of slack, common practice, no source.
            const double width = e.upper[std::size_t(i)] - e.lower[std::size_t(i)];
            const double block = rr.trace() / in.mass_floor / (in.nu - in.theta.back());
            EXPECT_LE(width, 2.0 * block) << "noise " << noise << " pair " << i;
          }
      }
  }

  TEST(EigenEnclosure, OnePairIsTemplesInequality)
  {
    // One Ritz pair, M = I: the lower bound is θ − ρ²/(ν − θ) (Temple's
    // inequality, Kato 1949; Parlett, The Symmetric Eigenvalue Problem, ch. 10).
    EnclosureInput in;
    in.theta          = {1.0};
    in.residual_gram  = {1e-4}; // ρ² = 1e-4
    in.mass_floor     = 1.0;
    in.nu             = 1.5;
    in.spectrum_floor = -10.0;
    in.allowance      = {0.0};
    const Enclosures e = enclose(in);
    EXPECT_NEAR(e.lower[0], 1.0 - 1e-4 / 0.5, 1e-15);
    EXPECT_DOUBLE_EQ(e.upper[0], 1.0);
  }
} // namespace alloyspec
