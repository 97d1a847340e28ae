/** @file potential_model.h  Single-site laws and the random cell potential V_ω. */
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  class Lattice;

  /**
   * The law of one cell value @f$q_n@f$, sampled by inversion: sample(u) is the
   * quantile function @f$F^{-1}(u)@f$ for @f$u \in (0,1)@f$.
   */
  class SingleSiteLaw
  {
  public:
    virtual ~SingleSiteLaw() = default;
    virtual double      quantile(double u) const = 0;
    virtual double      mean() const = 0;
    virtual double      variance() const = 0;
    /** Smallest value the law can take (the bottom of the almost-sure spectrum). */
    virtual double      support_min() const = 0;
    virtual double      support_max() const = 0;
    virtual std::string description() const = 0;
  };

  // The factories throw InputError, naming the matching `potential/...`
  // parameter, for arguments outside the allowed range.

  /** Uniform on [a, b], a < b. */
  std::unique_ptr<SingleSiteLaw> make_uniform_law(double a, double b);
  /** Binary alloy: q_A with probability c, q_B otherwise (0 ≤ c ≤ 1). */
  std::unique_ptr<SingleSiteLaw> make_bernoulli_law(double c, double q_a, double q_b);
  /** Finite law: values[i] with probabilities[i] (1..64 of them; non-negative, summing to 1 within 1e-9, renormalised). */
  std::unique_ptr<SingleSiteLaw> make_discrete_law(const std::vector<double> &values,
                                                   const std::vector<double> &probabilities);

  /**
   * Reads a cell-values file for @p lattice: one line per cell with
   * dimension() 0-based integer indices and then the value ("i j k value" in
   * 3D, "i value" in 1D); blank lines and text after '#' are ignored. Throws
   * InputError naming the file and line for a malformed line, an out-of-range
   * index, a duplicated cell, a non-finite value; and naming the first missing
   * cell if any is absent. Returns values in Lattice::cell_index order.
   */
  std::vector<double> read_cell_values(const std::string &path, const Lattice &lattice);

  /**
   * The cell potential @f$V_\omega = \sum_n q_n(\omega)\chi_n@f$.
   *
   * Parameters (subsection `potential`): `law` = uniform | bernoulli |
   * discrete | file, and per law: `minimum`, `maximum` (uniform);
   * `concentration`, `value A`, `value B` (bernoulli); `values`,
   * `probabilities` (discrete); `file` (file).
   */
  class PotentialModel
  {
  public:
    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `potential`; for law = file also reads and checks the file. */
    void parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice);

    /** Build directly (tests): a random law on the given lattice. */
    void set_law(std::unique_ptr<SingleSiteLaw> law, const Lattice &lattice);
    /** Build directly (tests): fixed cell values (size must be lattice.n_cells()). */
    void set_fixed_values(std::vector<double> values, const Lattice &lattice);

    /** Values of all cells for realisation @p r: q_n = F^{-1}(uniform_open01(seed, r, n)). */
    std::vector<double> cell_values(std::uint64_t seed, std::uint64_t realisation) const;

    bool                 is_random() const { return law_ != nullptr; }
    const SingleSiteLaw *law() const { return law_.get(); }
    /** Lower bound of every cell value (law support or file minimum). */
    double               bottom() const;
    /** Upper bound of every cell value. */
    double               top() const;
    std::string          description() const;

  private:
    std::shared_ptr<const SingleSiteLaw> law_;
    std::vector<double>                  fixed_values_;
    std::size_t                          n_cells_ = 0;
    /** Where fixed values came from (for description()). */
    std::string                          fixed_source_;
  };
} // namespace alloyspec
