/** @file weyl_law.cc  Exact free-box spectra and their Weyl asymptotics. */
#include <alloyspec/model/weyl_law.h>

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;

    void check_extents(const std::vector<double> &extents)
    {
      if (extents.empty() || extents.size() > 3)
        throw std::invalid_argument("free box: need 1 to 3 extents, got " +
                                    std::to_string(extents.size()));
      for (const double l : extents)
        if (!(l > 0.0) || !std::isfinite(l))
          throw std::invalid_argument("free box: extents must be positive and finite");
    }

    /**
     * The box spectrum is a quadratic form on a lattice: λ(n) = Σ_i c_i n_i²,
     * with c_i = π²/ℓ_i² and n_i ≥ 1 (Dirichlet) or n_i ≥ 0 (Neumann), or
     * c_i = 4π²/ℓ_i² and n_i ∈ ℤ (periodic, folded to n_i ≥ 0 with weight 2 for
     * n_i ≠ 0). Counting and listing share this description, so that both agree
     * on which lattice points lie below a given energy.
     */
    struct BoxLattice
    {
      std::vector<double> coefficient;
      long                first_index;
      bool                mirrored;

      BoxLattice(const std::vector<double> &extents, const Boundary bc)
        : first_index(bc == Boundary::dirichlet ? 1 : 0)
        , mirrored(bc == Boundary::periodic)
      {
        check_extents(extents);
        const double numerator = (bc == Boundary::periodic ? 4.0 : 1.0) * pi * pi;
        for (const double l : extents)
          coefficient.push_back(numerator / (l * l));
      }

      std::uint64_t weight(const long n) const { return (mirrored && n != 0) ? 2 : 1; }

      /**
       * The largest n with partial + c n² ≤ energy, or first_index − 1 if none.
       * The square root gives a first guess; the two loops repair rounding, so
       * the comparison is exactly the one used when listing eigenvalues.
       */
      long last_index(const std::size_t direction, const double partial, const double energy) const
      {
        const double c         = coefficient[direction];
        const double remaining = energy - partial;
        if (remaining < 0.0)
          return first_index - 1;
        long n = static_cast<long>(std::floor(std::sqrt(remaining / c)));
        while (partial + c * double(n + 1) * double(n + 1) <= energy)
          ++n;
        while (n >= first_index && partial + c * double(n) * double(n) > energy)
          --n;
        return std::max(n, first_index - 1);
      }

      /** Number of lattice points (with periodic weights) of value ≤ E in the
       *  directions from @p direction on, given the sum of the earlier terms. */
      std::uint64_t count(const std::size_t direction, const double partial,
                          const double energy) const
      {
        const long last = last_index(direction, partial, energy);
        if (last < first_index)
          return 0;
        if (direction + 1 == coefficient.size())
          // Last direction: the admissible n form a range, counted in closed form.
          return mirrored ? std::uint64_t(2 * last + 1) : std::uint64_t(last - first_index + 1);
        std::uint64_t total = 0;
        for (long n = first_index; n <= last; ++n)
          total += weight(n) *
                   count(direction + 1, partial + coefficient[direction] * double(n) * double(n),
                         energy);
        return total;
      }

      void list(const std::size_t direction, const double partial, const double energy,
                std::vector<double> &out) const
      {
        const long last = last_index(direction, partial, energy);
        for (long n = first_index; n <= last; ++n)
          {
            const double value = partial + coefficient[direction] * double(n) * double(n);
            if (direction + 1 == coefficient.size())
              out.insert(out.end(), weight(n), value);
            else
              for (std::uint64_t copy = 0; copy < weight(n); ++copy) // ±n alike
                list(direction + 1, value, energy, out);
          }
      }
    };
  } // namespace

  std::vector<double> free_box_eigenvalues(const std::vector<double> &extents, const Boundary bc,
                                           const std::size_t count)
  {
    const BoxLattice lattice(extents, bc);
    if (count == 0)
      return {};

    // Find an energy below which at least `count` eigenvalues lie, starting from
    // the lowest one and growing geometrically, then list everything below it.
    double energy = 0.0;
    for (std::size_t i = 0; i < extents.size(); ++i)
      energy += lattice.coefficient[i] * double(lattice.first_index * lattice.first_index);
    energy = std::max(energy, *std::min_element(lattice.coefficient.begin(),
                                                lattice.coefficient.end()));
    while (lattice.count(0, 0.0, energy) < count)
      energy *= 1.5;

    std::vector<double> values;
    lattice.list(0, 0.0, energy, values);
    std::sort(values.begin(), values.end());
    values.resize(count);
    return values;
  }

  std::uint64_t free_box_count(const std::vector<double> &extents, const Boundary bc,
                               const double energy)
  {
    const BoxLattice lattice(extents, bc);
    if (!(energy >= 0.0))
      return 0;
    return lattice.count(0, 0.0, energy);
  }

  double weyl_count(const std::vector<double> &extents, const Boundary bc, const double energy)
  {
    check_extents(extents);
    if (!(energy >= 0.0))
      return 0.0;

    // Leading term: H. Weyl, Math. Ann. 71 (1912) 441 (and Nachr. Ges. Wiss.
    // Göttingen 1911), from memory. Boundary correction ∓ (surface) · E^{(d-1)/2}:
    // V. Ivrii, Funct. Anal. Appl. 14 (1980) 98, from memory. The edge term in
    // 3D and the constant 1/4 in 2D are the box lattice-point expansion, e.g.
    // R. Balian & C. Bloch, Ann. Phys. 60 (1970) 401 and H. P. Baltes &
    // E. R. Hilf, "Spectra of Finite Systems" (1976), from memory; the 3D form
    // was checked here against exact lattice counts (tests/unit/test_weyl_law.cc).
    const std::size_t d      = extents.size();
    const double      root_e = std::sqrt(energy);
    double            volume = 1.0;
    for (const double l : extents)
      volume *= l;
    const double leading = volume * free_ids_density(static_cast<unsigned int>(d), energy);
    if (bc == Boundary::periodic)
      return leading;
    const double sign = (bc == Boundary::dirichlet) ? -1.0 : 1.0;

    if (d == 1)
      return leading + sign * 0.5;
    if (d == 2)
      {
        const double perimeter = 2.0 * (extents[0] + extents[1]);
        return leading + sign * perimeter * root_e / (4.0 * pi) + 0.25;
      }
    const double surface =
      2.0 * (extents[0] * extents[1] + extents[1] * extents[2] + extents[0] * extents[2]);
    const double edges = 4.0 * (extents[0] + extents[1] + extents[2]);
    return leading + sign * surface * energy / (16.0 * pi) + edges * root_e / (16.0 * pi);
  }

  double free_ids_density(const unsigned int dimension, const double energy_minus_q)
  {
    // ω_d (E−q)^{d/2} / (2π)^d: phase-space volume of {|p|² ≤ E − q} per unit volume.
    const double x = std::max(energy_minus_q, 0.0);
    switch (dimension)
      {
        case 1:
          return std::sqrt(x) / pi;
        case 2:
          return x / (4.0 * pi);
        case 3:
          return x * std::sqrt(x) / (6.0 * pi * pi);
        default:
          throw std::invalid_argument("free_ids_density: dimension must be 1, 2 or 3, got " +
                                      std::to_string(dimension));
      }
  }

  double semiclassical_ids(const unsigned int dimension, const std::vector<double> &cell_values,
                           const double energy)
  {
    if (cell_values.empty())
      throw std::invalid_argument("semiclassical_ids: no cell values");
    double sum = 0.0;
    for (const double q : cell_values)
      sum += free_ids_density(dimension, energy - q);
    return sum / double(cell_values.size());
  }
} // namespace alloyspec
