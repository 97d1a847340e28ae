// The tilted IDS of short chains against an exact count on one very long chain.
//
// The reference is the infinite-volume IDS N(E) of the binary chain, estimated
// by the eigenvalue count of one chain of 4·10^8 cells with test-side transfer
// matrices and Sturm oscillation (independent of the library: its own random
// generator, its own counter). The tilted estimates come from the library's
// tilted Bernoulli law and log weights, and from IdsAccumulator, on chains of
// 200 cells counted exactly by the same counter. Dirichlet–Neumann bracketing
// of the expectations, E[N_D,L(E)] ≤ N(E) ≤ E[N_N,L(E)] (Kirsch & Martinelli,
// J. reine angew. Math. 334 (1982) 141; from memory), is what a 200-cell
// estimate can be compared with honestly.
#include "sturm_1d.h"

#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>

#include <gtest/gtest.h>

#include <array>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <random>
#include <vector>

namespace
{
  using namespace alloyspec;

  // The invented binary chain of configs/deep_tail_chain.prm: barriers of
  // height 4 with probability 1/2, wells at 0 otherwise, cells of unit length.
  constexpr double barrier       = 4.0;
  constexpr double concentration = 0.5;
  /**
   * An energy in the deep tail: a state below it needs a run of about 19
   * wells (π²/(ℓ+1)² < E), 2^−19 ≈ 2e-6 per cell; a chain of 10^9 cells
   * measured N(E) = 9.37e-7 ± 0.31e-7 per cell there (937 states, 7 s).
   */
  constexpr double tail_energy = 0.025;
  /**
   * Cells of the reference chain: about 375 states below the energy, a 5 %
   * Poisson error, in about 3 s (10^9 cells took 7 s on the 2-core machine).
   */
  constexpr std::uint64_t reference_cells = 400'000'000;
  constexpr unsigned int  short_cells     = 200;
  /**
   * The tilt chosen by the cross-entropy pilot on this chain (README, measured
   * on configs/deep_tail_chain.prm): wells drawn with probability 0.533.
   */
  constexpr double tilt = 0.0327;
  /** Short chains per estimate: about 60 chains with a state below the energy. */
  constexpr std::uint64_t short_chains = 200'000;
  /** Two-sided 95 % normal quantile Φ⁻¹(0.975) (tables of the normal law). */
  constexpr double z95 = 1.959963984540054;

  /**
   * Streaming Sturm counter for a chain of unit cells with values 0 or the
   * barrier: the shooting solution (u, u') of −u'' + v u = E u is carried
   * across each cell by its exact transfer matrix, and the zeros of u are
   * counted as sign changes of u at the cell ends. This is exact when no cell
   * can hold two zeros: in a barrier u has at most one zero (it is convex
   * where it is positive), in a well it is A sin(φ + k t) with k = √E, and
   * k < π leaves room for one zero at most. By Sturm oscillation (Coddington &
   * Levinson ch. 8) the zeros in (0, L) are #{λ < E} for Dirichlet ends (the
   * solution starts at u = 0, u' = 1); Neumann (u = 1, u' = 0) adds one when
   * u u' < 0 at the right end (tests/support/sturm_1d.h).
   */
  class ChainCounter
  {
  public:
    ChainCounter(const double energy, const Boundary bc)
    {
      const double k = std::sqrt(energy), kappa = std::sqrt(barrier - energy);
      if (!(k < 3.14159))
        throw std::invalid_argument("ChainCounter: needs √E < π");
      well_    = {{std::cos(k), std::sin(k) / k, -k * std::sin(k), std::cos(k)}};
      barrier_ = {{std::cosh(kappa), std::sinh(kappa) / kappa, kappa * std::sinh(kappa),
                   std::cosh(kappa)}};
      neumann_ = bc == Boundary::neumann;
      u_ = neumann_ ? 1.0 : 0.0, du_ = neumann_ ? 0.0 : 1.0;
    }

    void add(const bool is_barrier)
    {
      const auto  &m  = is_barrier ? barrier_ : well_;
      const double u  = m[0] * u_ + m[1] * du_;
      const double du = m[2] * u_ + m[3] * du_;
      // The first cell of a Dirichlet chain starts at the zero u(0) = 0, which
      // is not inside (0, L): its sign is taken from u' = 1 > 0.
      const bool was_positive = u_ > 0 || (u_ == 0 && du_ > 0);
      zeros_ += was_positive != (u > 0);
      u_ = u, du_ = du;
      // Barriers grow the solution by up to e^{2κ} per cell: rescale before overflow.
      if (++since_scale_ == 64)
        {
          const double s = 1.0 / (std::abs(u_) + std::abs(du_));
          u_ *= s, du_ *= s, since_scale_ = 0;
        }
    }

    std::uint64_t count() const
    {
      if (neumann_)
        return zeros_ + (u_ * du_ < 0 ? 1 : 0);
      return zeros_ - (u_ == 0 && zeros_ > 0 ? 1 : 0);
    }

  private:
    std::array<double, 4> well_{}, barrier_{};
    bool                  neumann_  = false;
    double                u_ = 0, du_ = 1;
    std::uint64_t         zeros_       = 0;
    unsigned int          since_scale_ = 0;
  };

  std::uint64_t count_chain(const std::vector<double> &q, const Boundary bc)
  {
    ChainCounter counter(tail_energy, bc);
    for (const double v : q)
      counter.add(v == barrier);
    return counter.count();
  }

  /** The streaming counter agrees with the Prüfer-angle counter of sturm_1d.h. */
  TEST(DeepTailChain, StreamingCounterAgreesWithPruferCounter)
  {
    std::mt19937_64 rng(5);
    for (int chain = 0; chain < 200; ++chain)
      {
        std::vector<double> q(500);
        for (auto &v : q)
          v = (rng() & 1u) ? barrier : 0.0;
        // Runs of wells long enough to hold states below the energy.
        const std::size_t start = rng() % 400;
        for (std::size_t n = start; n < start + 10 + chain % 60 && n < q.size(); ++n)
          q[n] = 0.0;
        for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
          for (const double e : {0.01, tail_energy, 0.1, 1.0})
            {
              ChainCounter counter(e, bc);
              for (const double v : q)
                counter.add(v == barrier);
              EXPECT_EQ(counter.count(), alloyspec::testing::count_below(q, 1.0, bc, e))
                << "chain " << chain << ", E = " << e;
            }
      }
  }

  /**
   * The deep-tail check: at E where N ≈ 1e-6 per cell, the reference
   * count of 4·10^8 cells must lie in the bracket of the tilted 200-cell
   * estimates, [lower_D, upper_N], widened by the reference's own 95 %
   * Poisson error (the states of distinct rare runs are nearly independent,
   * so the count's standard deviation is about its square root).
   */
  /** The long chain's count below tail_energy, counted once for every test of this file. */
  const ChainCounter &long_chain_reference(double &seconds)
  {
    static double             elapsed = 0;
    static const ChainCounter counter = [] {
      const auto start = std::chrono::steady_clock::now();
      // Reference: one long chain, its own generator (64 cells per draw).
      ChainCounter    reference(tail_energy, Boundary::dirichlet);
      std::mt19937_64 rng(20261202);
      for (std::uint64_t n = 0; n < reference_cells; n += 64)
        {
          std::uint64_t bits = rng();
          for (int b = 0; b < 64; ++b, bits >>= 1)
            reference.add(bits & 1u); // barrier with probability 1/2
        }
      elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      return reference;
    }();
    seconds = elapsed;
    return counter;
  }

  TEST(DeepTailChain, TiltedShortChainsBracketTheLongChainCount)
  {
    double              reference_seconds = 0;
    const ChainCounter &reference         = long_chain_reference(reference_seconds);
    const double count     = double(reference.count());
    const double n_ref     = count / double(reference_cells);
    const double n_ref_err = std::sqrt(count) / double(reference_cells);

    // Tilted estimates from 200-cell chains, per unit length (= per cell).
    const Lattice  lattice(std::vector<unsigned int>{short_cells});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    model.set_tilt(tilt);
    IdsAccumulator dirichlet({tail_energy}, double(short_cells));
    IdsAccumulator neumann({tail_energy}, double(short_cells));
    for (std::uint64_t r = 0; r < short_chains; ++r)
      {
        const std::vector<double> q = model.cell_values(3, r);
        const double              w = model.log_weight(q);
        dirichlet.add_counts({count_chain(q, Boundary::dirichlet)}, w);
        neumann.add_counts({count_chain(q, Boundary::neumann)}, w);
      }
    const auto d = dirichlet.rows().front(), n = neumann.rows().front();
    const double lower_d = std::max(0.0, d.mean - z95 * d.standard_error);
    const double upper_n = n.mean + z95 * n.standard_error;
    std::cout << "reference: " << reference.count() << " states below E = " << tail_energy
              << " in " << reference_cells << " cells, N = " << n_ref << " ± " << n_ref_err
              << " per cell (" << reference_seconds << " s)\n"
              << "tilted 200-cell chains (θ = " << tilt << ", " << short_chains
              << " chains, weight ESS " << dirichlet.weight_effective_sample_size() << "):\n"
              << "  Dirichlet " << d.mean << " [" << lower_d << ", " << d.mean + z95 * d.standard_error
              << "], ESS " << d.effective_sample_size << "\n"
              << "  Neumann   " << n.mean << " [" << std::max(0.0, n.mean - z95 * n.standard_error)
              << ", " << upper_n << "], ESS " << n.effective_sample_size << "\n"
              << "  the Dirichlet interval alone "
              << (std::abs(d.mean - n_ref) <= z95 * d.standard_error ? "contains" : "misses")
              << " the reference" << std::endl;
    ASSERT_GT(reference.count(), 100u) << "not in the intended depth";
    // The Dirichlet interval alone need not contain N(E): E[N_D,L] lies below it by
    // the states the ends cut off (about a run length over L; measured 15 % here); the
    // bracket is what bracketing guarantees.
    EXPECT_LE(lower_d, n_ref + z95 * n_ref_err);
    EXPECT_GE(upper_n, n_ref - z95 * n_ref_err);
  }

  /**
   * The same check with the localised tilt (tilt_window.h): windows of 30
   * cells tilted by θ = 0.6 (wells 0.92 inside), an untilted share of 0.2.
   * A state below E = 0.025 needs a run of about 20 wells, which a window
   * draws often; 20 000 chains (a tenth of the uniform tilt's) suffice. The
   * assertion is the same bracket [lower_D, upper_N] against the reference
   * widened by its Poisson error (measured: Dirichlet 6.4e-7 [4.6e-7, 8.3e-7],
   * Neumann 7.1e-6 [2.1e-6, 1.2e-5] against 9.2e-7; the Dirichlet interval
   * alone misses it, as E[N_D,L] lies below N by the states the ends cut off).
   */
  TEST(DeepTailChain, WindowedTiltOfShortChainsBracketsTheLongChainCount)
  {
    constexpr std::uint64_t windowed_chains = 20'000;
    double              reference_seconds = 0;
    const ChainCounter &reference         = long_chain_reference(reference_seconds);
    const double        count             = double(reference.count());
    const double        n_ref             = count / double(reference_cells);
    const double        n_ref_err         = std::sqrt(count) / double(reference_cells);

    const Lattice  lattice(std::vector<unsigned int>{short_cells});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    model.set_tilt_window(30, 0.2);
    model.set_tilt(0.6);
    IdsAccumulator dirichlet({tail_energy}, double(short_cells));
    IdsAccumulator neumann({tail_energy}, double(short_cells));
    for (std::uint64_t r = 0; r < windowed_chains; ++r)
      {
        const std::vector<double> q = model.cell_values(5, r);
        const double              w = model.log_weight(q);
        dirichlet.add_counts({count_chain(q, Boundary::dirichlet)}, w);
        neumann.add_counts({count_chain(q, Boundary::neumann)}, w);
      }
    const auto   d       = dirichlet.rows().front(), n = neumann.rows().front();
    const double lower_d = std::max(0.0, d.mean - z95 * d.standard_error);
    const double upper_n = n.mean + z95 * n.standard_error;
    std::cout << "reference N = " << n_ref << " ± " << n_ref_err << " per cell; windowed tilt ("
              << windowed_chains << " chains, weight ESS " << dirichlet.weight_effective_sample_size()
              << "): Dirichlet " << d.mean << " [" << lower_d << ", " << d.mean + z95 * d.standard_error
              << "], ESS " << d.effective_sample_size << "; Neumann " << n.mean << " ["
              << std::max(0.0, n.mean - z95 * n.standard_error) << ", " << upper_n << "], ESS "
              << n.effective_sample_size << "; Dirichlet interval alone "
              << (std::abs(d.mean - n_ref) <= z95 * std::hypot(d.standard_error, n_ref_err) ? "contains"
                                                                                           : "misses")
              << " the reference" << std::endl;
    EXPECT_LE(lower_d, n_ref + z95 * n_ref_err);
    EXPECT_GE(upper_n, n_ref - z95 * n_ref_err);
  }
} // namespace
