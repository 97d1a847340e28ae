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
    count_   = 1;
    for (const unsigned int l : cells_)
      {
        if (l == 0)
          throw std::invalid_argument("TiltWindows: every direction needs a cell");
        n_cells_ *= l;
        count_ *= l - span(l) + 1;
      }
  }

  long TiltWindows::component(const double u) const
  {
    if (u < alpha_)
      return -1;
    const double      x = (u - alpha_) / (1.0 - alpha_) * double(count_);
    const std::size_t c = std::min(count_ - 1, std::size_t(std::max(0.0, x)));
    return long(c);
  }

  bool TiltWindows::contains(const std::size_t c, const std::size_t n) const
  {
    // Window c is numbered lexicographically over the corners that keep it inside
    // the box (first direction fastest), like the cells (Lattice::cell_index).
    std::size_t a = c, b = n;
    for (const unsigned int l : cells_)
      {
        const unsigned int s = span(l), corners = l - s + 1;
        const unsigned int corner = a % corners, x = b % l;
        a /= corners, b /= l;
        if (x < corner || x >= corner + s)
          return false;
      }
    return true;
  }

  double TiltWindows::log_weight(const std::vector<double> &t) const
  {
    if (t.size() != n_cells_)
      throw std::invalid_argument("TiltWindows::log_weight: one log ratio per cell is needed");
    // ℓ_c by window sums along each direction in turn (separable): the pass over
    // direction i replaces the cell extent L_i by the corner extent L_i − s_i + 1,
    // entry (corner, rest) then holding the sum over s_i consecutive cells.
    std::vector<double>       sums = t;
    std::vector<unsigned int> shape = cells_;
    std::size_t               below = 1; // entries per step of direction i
    for (std::size_t i = 0; i < shape.size(); ++i)
      {
        const unsigned int l = shape[i], s = span(l), corners = l - s + 1;
        std::size_t        above = 1;
        for (std::size_t j = i + 1; j < shape.size(); ++j)
          above *= shape[j];
        std::vector<double> next(below * corners * above);
        for (std::size_t hi = 0; hi < above; ++hi)
          for (unsigned int k = 0; k < corners; ++k)
            for (std::size_t lo = 0; lo < below; ++lo)
              {
                double sum = 0;
                for (unsigned int m = 0; m < s; ++m)
                  sum += sums[lo + below * ((k + m) + std::size_t(l) * hi)];
                next[lo + below * (k + std::size_t(corners) * hi)] = sum;
              }
        sums.swap(next);
        shape[i] = corners;
        below *= corners;
      }
    return mixture_log_weight(sums);
  }

  double TiltWindows::mixture_log_weight(const std::vector<double> &ell) const
  {
    if (ell.size() != count_)
      throw std::invalid_argument("TiltWindows::mixture_log_weight: one log ratio per window is needed");
    // −ln(α + (1 − α)/K Σ_c e^{−ℓ_c}) as a log-sum-exp over the K + 1 terms.
    std::vector<double> terms;
    terms.reserve(count_ + 1);
    terms.push_back(std::log(alpha_));
    const double log_share = std::log1p(-alpha_) - std::log(double(count_));
    for (const double x : ell)
      terms.push_back(log_share - x);
    const double top = *std::max_element(terms.begin(), terms.end());
    if (!std::isfinite(top))
      throw std::invalid_argument("TiltWindows::log_weight: log ratios must be finite");
    double s = 0;
    for (const double x : terms)
      s += std::exp(x - top);
    return -(top + std::log(s));
  }

  std::size_t TiltWindows::cell(const std::size_t c, const std::size_t j) const
  {
    std::size_t a = c, b = j, n = 0, stride = 1;
    for (const unsigned int l : cells_)
      {
        const unsigned int s = span(l), corners = l - s + 1;
        n += (a % corners + b % s) * stride;
        a /= corners, b /= s, stride *= l;
      }
    return n;
  }

  std::size_t TiltWindows::offset(const std::size_t c, const std::size_t n) const
  {
    std::size_t a = c, b = n, j = 0, stride = 1;
    for (const unsigned int l : cells_)
      {
        const unsigned int s = span(l), corners = l - s + 1;
        const unsigned int corner = a % corners, x = b % l;
        a /= corners, b /= l;
        if (x < corner || x >= corner + s)
          return window_size();
        j += (x - corner) * stride;
        stride *= s;
      }
    return j;
  }

  std::size_t TiltWindows::window_size() const
  {
    std::size_t n = 1;
    for (const unsigned int l : cells_)
      n *= span(l);
    return n;
  }

  std::vector<unsigned int> TiltWindows::window_extent() const
  {
    std::vector<unsigned int> extent;
    for (const unsigned int l : cells_)
      extent.push_back(span(l));
    return extent;
  }
} // namespace alloyspec
