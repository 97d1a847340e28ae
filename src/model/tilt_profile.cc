/** @file tilt_profile.cc  Relative tilts of the cells of a tilted region. */
#include <alloyspec/model/tilt_profile.h>

#include <algorithm>
#include <cmath>
#include <map>
#include <stdexcept>
#include <utility>

namespace alloyspec
{
  namespace
  {
    /** m_s(k) / max m_s for k already folded to k ≤ (s − 1)/2. */
    double relative_mass(const unsigned int s, const unsigned int k)
    {
      const double pi   = 3.14159265358979323846;
      const auto   mass = [&](const double x) {
        return 0.5 - double(s) / (4.0 * pi) * (std::sin(2.0 * pi * (x + 1.0) / s) - std::sin(2.0 * pi * x / s));
      };
      // The largest cell mass is that of the central cell (odd s) or of the
      // two central cells (even s): the folded index (s − 1)/2 rounded down.
      return mass(k) / mass((s - 1) / 2);
    }
  } // namespace

  std::string tilt_shape_name(const TiltShape shape)
  {
    return shape == TiltShape::flat ? "flat" : "lowest mode";
  }

  TiltProfile::TiltProfile(std::vector<unsigned int> extent, const TiltShape shape)
    : extent_(std::move(extent))
    , shape_(shape)
  {
    if (extent_.empty() || extent_.size() > 3)
      throw std::invalid_argument("TiltProfile: need 1 to 3 directions");
    std::size_t n = 1;
    for (const unsigned int s : extent_)
      {
        if (s == 0)
          throw std::invalid_argument("TiltProfile: every direction needs a cell");
        n *= s;
      }
    level_of_.resize(n);
    if (shape_ == TiltShape::flat)
      {
        levels_       = {1.0};
        multiplicity_ = {n};
        return;
      }
    // Key: the sorted (extent, folded index) pairs, so that mirror images and
    // exchanged directions of equal extent share one level and one value.
    std::map<std::vector<std::pair<unsigned int, unsigned int>>, std::size_t> index;
    for (std::size_t j = 0; j < n; ++j)
      {
        std::vector<std::pair<unsigned int, unsigned int>> key;
        std::size_t                                        rest = j;
        for (const unsigned int s : extent_)
          {
            const unsigned int k = static_cast<unsigned int>(rest % s);
            rest /= s;
            key.emplace_back(s, std::min(k, s - 1 - k));
          }
        std::sort(key.begin(), key.end());
        const auto [it, is_new] = index.emplace(key, levels_.size());
        if (is_new)
          {
            double phi = 1.0;
            for (const auto &[s, k] : key)
              phi *= relative_mass(s, k);
            levels_.push_back(phi);
            multiplicity_.push_back(0);
          }
        level_of_[j] = it->second;
        ++multiplicity_[it->second];
      }
  }
} // namespace alloyspec
