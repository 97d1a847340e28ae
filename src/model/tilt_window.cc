/** @file tilt_window.cc  Windows of the localised tilt and the exact mixture weight. */
#include <alloyspec/model/tilt_window.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace alloyspec
{
  TiltWindows::TiltWindows(std::vector<unsigned int> cells, const unsigned int edge,
                           const double untilted_share)
    : cells_(std::move(cells))
    , edge_(edge)
    , alpha_(untilted_share)
  {
    if (cells_.empty() || cells_.size() > 3 || edge_ == 0 || !(alpha_ > 0.0 && alpha_ < 1.0))
      throw std::invalid_argument("TiltWindows: need 1 to 3 directions, an edge >= 1 and a share in (0, 1)");
    n_cells_ = 1;
    for (const unsigned int l : cells_)
      {
        if (l == 0)
          throw std::invalid_argument("TiltWindows: every direction needs a cell");
        n_cells_ *= l;
      }
  }

  long TiltWindows::component(const double u) const
  {
    if (u < alpha_)
      return -1;
    const double      x = (u - alpha_) / (1.0 - alpha_) * double(n_cells_);
    const std::size_t c = std::min(n_cells_ - 1, std::size_t(std::max(0.0, x)));
    return long(c);
  }

  bool TiltWindows::contains(const std::size_t c, const std::size_t n) const
  {
    // Lexicographic cell indices, the first direction fastest (Lattice::cell_index).
    std::size_t a = c, b = n;
    for (const unsigned int l : cells_)
      {
        const unsigned int span = std::min(edge_, l);
        const unsigned int ca = a % l, nb = b % l;
        a /= l, b /= l;
        // Distance from the window's corner to the cell, going up and around the face.
        if ((nb + l - ca) % l >= span)
          return false;
      }
    return true;
  }

  double TiltWindows::log_weight(const std::vector<double> &t) const
  {
    if (t.size() != n_cells_)
      throw std::invalid_argument("TiltWindows::log_weight: one log ratio per cell is needed");
    // ℓ_c by cyclic window sums along each direction: after the pass over
    // direction i, entry c holds the sum over the window's extent in the
    // directions 0..i, with the corner at c.
    std::vector<double> sums = t, next(n_cells_);
    std::size_t         stride = 1;
    for (const unsigned int l : cells_)
      {
        const unsigned int span = std::min(edge_, l);
        for (std::size_t c = 0; c < n_cells_; ++c)
          {
            const std::size_t coordinate = (c / stride) % l, base = c - coordinate * stride;
            double            s          = 0;
            for (unsigned int k = 0; k < span; ++k)
              s += sums[base + ((coordinate + k) % l) * stride];
            next[c] = s;
          }
        sums.swap(next);
        stride *= l;
      }
    // −ln(α + (1 − α)/K Σ_c e^{−ℓ_c}) as a log-sum-exp over the K + 1 terms.
    std::vector<double> terms;
    terms.reserve(n_cells_ + 1);
    terms.push_back(std::log(alpha_));
    const double log_share = std::log1p(-alpha_) - std::log(double(n_cells_));
    for (const double ell : sums)
      terms.push_back(log_share - ell);
    const double top = *std::max_element(terms.begin(), terms.end());
    if (!std::isfinite(top))
      throw std::invalid_argument("TiltWindows::log_weight: log ratios must be finite");
    double s = 0;
    for (const double x : terms)
      s += std::exp(x - top);
    return -(top + std::log(s));
  }
} // namespace alloyspec
