#include <alloyspec/solver/eigen_enclosure.h>

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace alloyspec
{
  Enclosures enclose(const EnclosureInput &input)
  {
    const auto j = static_cast<Eigen::Index>(input.theta.size());
    if (input.residual_gram.size() != static_cast<std::size_t>(j * j) ||
        input.allowance.size() != input.theta.size())
      throw std::invalid_argument("enclose: sizes of the Ritz data do not match");
    if (!(input.mass_floor > 0))
      throw std::invalid_argument("enclose: the mass floor must be positive");
    Enclosures out;
    out.lower.assign(input.theta.size(), input.spectrum_floor);
    out.upper = input.theta;
    for (std::size_t i = 0; i < input.theta.size(); ++i)
      out.upper[i] += input.allowance[i];
    if (j == 0)
      return out;
    if (!(input.theta.back() < input.nu))
      throw std::invalid_argument("enclose: the cut must lie above the last Ritz value");

    const Eigen::Map<const Eigen::MatrixXd> rr(input.residual_gram.data(), j, j);
    Eigen::MatrixXd a0 = Eigen::MatrixXd::Zero(j, j);
    Eigen::MatrixXd a1 = 0.5 * (rr + rr.transpose()) / input.mass_floor;
    for (Eigen::Index i = 0; i < j; ++i)
      {
        const double d = input.theta[std::size_t(i)] - input.nu;
        a0(i, i)       = d;
        a1(i, i) += d * d;
      }
    // A0 is negative definite: solve (−A0) y = (−μ) A1 y, A1 positive definite.
    Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> eig(-a0, a1, Eigen::EigenvaluesOnly);
    if (eig.info() != Eigen::Success)
      throw std::runtime_error("enclose: the small eigenproblem failed");
    // eig gives −μ ascending, so μ descending: μ_l ascending is index j−1−(l−1).
    for (Eigen::Index l = 0; l < j; ++l)
      {
        const double mu    = -eig.eigenvalues()[j - 1 - l]; // ascending μ, l = 0 the most negative
        const double bound = input.nu + 1.0 / mu;           // bounds λ_{j−l} (1-based)
        const std::size_t i = static_cast<std::size_t>(j - 1 - l);
        out.lower[i]        = std::max(input.spectrum_floor, bound) - input.allowance[i];
      }
    return out;
  }
} // namespace alloyspec
