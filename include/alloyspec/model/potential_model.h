/** @file potential_model.h  The random cell potential V_ω and the cell-values file (laws: single_site_laws.h). */
#pragma once

#include <alloyspec/model/single_site_laws.h>
#include <alloyspec/model/tilt_window.h>

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
   * discrete | gaussian | beta | tabulated | binomial | file, and per law:
   * - uniform: `minimum`, `maximum`;
   * - bernoulli: `concentration`, `value A`, `value B`;
   * - discrete: `values`, `probabilities`;
   * - gaussian: `mean`, `standard deviation`, `truncate`; with
   *   `truncate = true` the law is conditioned on [`minimum`, `maximum`];
   * - beta: `shape at minimum` (α), `shape at maximum` (β), scaled to
   *   [`minimum`, `maximum`];
   * - tabulated: `density file` (two columns q, h(q); piecewise linear);
   * - binomial: `atoms per cell`, `concentration` (of A), `value A`,
   *   `value B` (coarse-grained alloy, see make_binomial_alloy_law());
   * - file: `file` (one fixed potential).
   * `minimum` and `maximum` mean the same for every law that uses them: the
   * interval all values lie in.
   */
  class PotentialModel
  {
  public:
    /** The draw index (random_stream.h) of the uniform that picks a realisation's tilt window. */
    static constexpr std::uint32_t window_draw = 0xfffffff0u;

    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `potential`; for law = file also reads and checks the file. */
    void parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice);

    /** Build directly (tests): a random law on the given lattice. */
    void set_law(std::unique_ptr<SingleSiteLaw> law, const Lattice &lattice);
    /** Build directly (tests): fixed cell values (size must be lattice.n_cells()). */
    void set_fixed_values(std::vector<double> values, const Lattice &lattice);

    /**
     * Values of all cells for realisation @p r: q_n = F^{-1}(uniform_open01(seed, r, n)),
     * with F the sampling law: the model law, or its tilt after set_tilt().
     * A pure function of (seed, realisation, cell, tilt).
     */
    std::vector<double> cell_values(std::uint64_t seed, std::uint64_t realisation) const;
    /**
     * Values of the listed @p cells only (Lattice::cell_index), in that
     * order: the same numbers as cell_values() at those indices, for a rank
     * of a distributed mesh that holds only these cells.
     */
    std::vector<double> cell_values(std::uint64_t seed, std::uint64_t realisation,
                                    const std::vector<std::size_t> &cells) const;

    /**
     * Draw cell values from the law tilted by θ (SingleSiteLaw::tilted(); θ in
     * the law's units). θ = 0 is plain sampling. Refused (InputError naming
     * `sampling/method`) for fixed cell values.
     */
    void   set_tilt(double theta);
    double tilt() const { return theta_; }
    /**
     * Tilt only the cells of one window of @p edge cells per direction, at a
     * random position, or (with probability @p untilted_share) none: the
     * defensive mixture of TiltWindows (tilt_window.h). @p edge = 0 restores
     * the tilt of every cell. Kept across set_tilt(). The component of a
     * realisation is drawn from its own uniform (draw window_draw of cell 0),
     * so cell values stay a pure function of (seed, realisation, cell, tilt,
     * window).
     */
    void set_tilt_window(unsigned int edge, double untilted_share);
    /** The window edge in cells; 0 when the whole box is tilted. */
    unsigned int tilt_window() const { return windows_ ? windows_->edge() : 0; }
    /**
     * @f$\ln w = \ln\prod_n p(q_n)/p_\theta(q_n) = \theta\sum_n q_n + N\ln M(\theta)@f$
     * of values @p q drawn by cell_values() (the law's units); with a tilt
     * window the exact mixture ratio of TiltWindows::log_weight(); exactly 0 for
     * plain sampling. The sum is compensated (Neumaier), so that ln w keeps
     * full precision when θΣq and N ln M nearly cancel.
     */
    double log_weight(const std::vector<double> &q) const;
    /** The law cell values are drawn from (the tilted one after set_tilt()). */
    const SingleSiteLaw *sampling_law() const
    {
      return tilted_law_ ? tilted_law_.get() : law_.get();
    }

    bool                 is_random() const { return law_ != nullptr; }
    const SingleSiteLaw *law() const { return law_.get(); }
    /**
     * Lower bound of every cell value: the infimum of the law's support (the
     * bottom of the almost-sure spectrum; -∞ for an untruncated Gaussian
     * law), or the minimum of fixed values. A realisation's own minimum is
     * the minimum of cell_values().
     */
    double               bottom() const;
    /** Upper bound of every cell value (+∞ for an untruncated Gaussian law). */
    double               top() const;
    std::string          description() const;

  private:
    std::shared_ptr<const SingleSiteLaw> law_;
    /** Set by set_tilt() with θ ≠ 0, with θ and ln M(θ). */
    std::shared_ptr<const SingleSiteLaw> tilted_law_;
    double                               theta_      = 0;
    double                               log_moment_ = 0;
    std::vector<double>                  fixed_values_;
    std::size_t                          n_cells_ = 0;
    /** Cells per direction of the lattice (for the windows). */
    std::vector<unsigned int>            cells_;
    /** Set by set_tilt_window() with an edge ≥ 1. */
    std::shared_ptr<const TiltWindows>   windows_;
    /** Where fixed values came from (for description()). */
    std::string                          fixed_source_;
  };
} // namespace alloyspec
