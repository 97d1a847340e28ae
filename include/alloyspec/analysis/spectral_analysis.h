/**
 * @file spectral_analysis.h  Statistics of stored spectra: bootstrap intervals
 * of the IDS, broadened densities of states, level-spacing ratios and inverse
 * participation ratios per energy bin. The fits of tails and of the box-size
 * dependence live in tail_fits.h.
 */
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  struct RealisationRecord;

  /**
   * Subsection `analysis`: how stored spectra are turned into densities, tail
   * fits, level statistics and figures. Energies and widths are in the energy
   * unit of the study.
   */
  struct AnalysisSettings
  {
    double        lorentzian_width  = 0.1;  ///< η of the resolvent broadening
    double        gaussian_width    = 0.1;  ///< σ of the Gaussian broadening
    unsigned int  bootstrap_samples = 1000; ///< resamples for percentile intervals
    std::uint64_t bootstrap_seed    = 1;    ///< seed of the resampling generator
    double        confidence_level  = 0.95; ///< of every interval reported
    /** Lifshitz window [E_a, E_b]; empty means automatic (see lifshitz_fraction). */
    std::vector<double> lifshitz_window;
    /** Automatic Lifshitz window ends where the IDS per cell first reaches this value. */
    double lifshitz_fraction = 0.02;
    /** Urbach window [E_a, E_b]; empty means automatic: from E0 to the mean potential. */
    std::vector<double>      urbach_window;
    double                   bin_width = 0.5; ///< energy bins of IPR and level statistics
    std::vector<std::string> figure_formats{"png", "svg"};
    /**
     * Widths still to be chosen from the computed spectrum (the entry was
     * `auto`, the default); resolved_for() fills them in and clears the flags.
     */
    bool lorentzian_automatic = false, gaussian_automatic = false, bin_automatic = false;

    /**
     * These settings with every automatic width chosen from @p records: with Δ
     * the median over records of the mean level spacing below complete_up_to,
     * divided by the number R of realisations (the spacing of the pooled levels,
     * which the averaged curves see), η = Δ and σ = 2Δ (a kernel about a spacing wide merges single levels
     * into a curve once averaged over realisations, and keeps structure wider
     * than that; common practice, no source), and the bin width a tenth of the
     * range of the trusted levels. The Lorentzian is the narrower because its
     * heavy tails need 30η of computed spectrum beyond an energy
     * (incomplete_margin()), the Gaussian only 6σ.
     * A width set by the user is kept. @p notes receives one line per width
     * chosen.
     */
    AnalysisSettings resolved_for(const std::vector<RealisationRecord> &records,
                                  std::vector<std::string>             &notes) const;

    static void declare_parameters(dealii::ParameterHandler &prm);
    /**
     * Reads subsection `analysis`; throws InputError naming `analysis/<entry>`
     * on a bad value. The widths accept `auto` (see resolved_for()).
     */
    void parse_parameters(dealii::ParameterHandler &prm);
  };

  /**
   * splitmix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
   * generators", OOPSLA 2014; constants as in Vigna's public-domain reference
   * code): a 64-bit state advanced by the golden-ratio increment and mixed by
   * two multiply–xorshift rounds. Deterministic across platforms, which the
   * standard library's distributions are not; used for bootstrap resampling.
   */
  class SplitMix64
  {
  public:
    explicit SplitMix64(std::uint64_t seed)
      : state_(seed)
    {}
    std::uint64_t next();
    /** Uniform integer in [0, n), n ≥ 1, by rejection (no modulo bias). */
    std::uint64_t below(std::uint64_t n);
    /** Uniform double in [0, 1) with 53 random bits. */
    double uniform();

  private:
    std::uint64_t state_;
  };

  /**
   * The counting functions of one boundary condition on an energy grid, one
   * row per realisation: `counts[r][i]` @f$= N_L^{(r)}(E_i)@f$ (per volume).
   * Only eigenvalues up to each realisation's `complete_up_to` are trusted;
   * `complete[i]` is false when some realisation is not complete at @f$E_i@f$.
   */
  struct CountingSamples
  {
    std::vector<double>              energies;
    /**
     * @f$w_r N_L^{(r)}(E_i)@f$: the counts already multiplied by the
     * realisation's likelihood ratio @f$w_r = e^{\log w_r}@f$ (1 for plain
     * sampling, which leaves the counts bit for bit), so that the plain sample
     * mean of a column is the unbiased importance-sampling estimate
     * @f$\frac1R\sum_r w_r N_r@f$ and a resample of rows carries each
     * realisation's weight with it.
     */
    std::vector<std::vector<double>> counts;
    /** @f$w_r@f$ of each row of counts. */
    std::vector<double>              weights;
    /** Some @f$w_r \ne 1@f$ (tilted sampling or a mixture of tilts). */
    bool                             weighted = false;
    /**
     * Effective number of realisations behind the mean at @f$E_i@f$:
     * @f$(\sum_r y_r)^2/\sum_r y_r^2@f$, @f$y_r = w_r N_r(E_i)@f$ (Kong 1992,
     * applied to the summands, as in IdsAccumulator::Row); 0 when all are 0.
     */
    std::vector<double>              effective_sample_size;
    std::vector<bool>                complete;
    /** Realisations with at least one eigenvalue @f$\le E_i@f$. */
    std::vector<std::size_t> realisations_with_states;
    /** Eigenvalues @f$\le E_i@f$ summed over realisations. */
    std::vector<std::size_t> states_below;
  };

  /**
   * Collects the records of boundary @p boundary (all realisations) on @p
   * energies, each row weighted by its record's likelihood ratio.
   */
  CountingSamples counting_samples(const std::vector<RealisationRecord> &records,
                                   const std::string &boundary, const std::vector<double> &energies,
                                   double volume);

  /** Mean and interval of a quantity at one energy. */
  struct IntervalRow
  {
    double energy;
    double mean;
    double standard_error;
    double lower; ///< lower end of the confidence interval
    double upper; ///< upper end
    bool   complete;
    /** @f$(\sum_r y_r)^2/\sum_r y_r^2@f$ of the summands @f$y_r@f$ of the mean; 0 when all are 0. */
    double effective_sample_size = 0;
  };

  /**
   * Bootstrap percentile interval of the mean IDS at each energy (Efron &
   * Tibshirani, An Introduction to the Bootstrap, 1993, ch. 13): draw @p
   * samples resamples of the realisations with replacement (the same resample
   * at every energy, so the band is that of the mean curve), and take the
   * @f$(1\mp c)/2@f$ quantiles of the resampled means, c the confidence level.
   * Realisations are the independent units; energies of one realisation are
   * not. Uses SplitMix64(@p seed), so results are reproducible.
   *
   * Weighted samples: a row is @f$w_r N_r@f$, so a resample draws realisations
   * with their weights attached and its mean is the same unbiased estimator
   * @f$\frac1R\sum_{r \in \text{resample}} w_r N_r@f$ as the point estimate
   * (the bootstrap of an importance-sampling mean; the resampled quantity is
   * the i.i.d. pair (w, N) under the tilted law).
   */
  std::vector<IntervalRow> bootstrap_mean_interval(const CountingSamples &samples,
                                                   unsigned int samples_count,
                                                   double confidence, std::uint64_t seed);

  /** Shape of the broadening kernel. */
  enum class Broadening
  {
    lorentzian,
    gaussian
  };

  /**
   * Broadened density of states of one boundary condition, averaged over
   * realisations, with the standard error of that average:
   * @f[ \rho_\eta(E) = \frac{1}{|\Lambda|}\sum_j \frac{\eta/\pi}{(E-\lambda_j)^2+\eta^2}
   *    = -\frac{1}{\pi|\Lambda|}\,\mathrm{Im}\,\mathrm{tr}\,(H - E - i\eta)^{-1} @f]
   * for Lorentzian width @f$\eta@f$, and
   * @f$\rho_\sigma(E) = |\Lambda|^{-1}\sum_j (2\pi\sigma^2)^{-1/2} e^{-(E-\lambda_j)^2/2\sigma^2}@f$
   * for Gaussian width @f$\sigma@f$. Both integrate to the counting function
   * convolved with the kernel, and tend to dN/dE as the width goes to 0.
   *
   * Only eigenvalues @f$\le@f$ complete_up_to enter. Eigenvalues missing above
   * that bound would still add to the density below it through the kernel's
   * tail, so an energy is marked incomplete when it lies within
   * incomplete_margin() widths of the smallest complete_up_to of the records.
   *
   * Weighted records: the mean is the unbiased
   * @f$\frac1R\sum_r w_r \rho^{(r)}(E)@f$ (@f$E_\theta[w\rho] = E_p[\rho]@f$),
   * its standard error the sample standard deviation of @f$w_r\rho^{(r)}@f$
   * over √R; with every @f$w_r = 1@f$ the plain mean, bit for bit.
   */
  std::vector<IntervalRow> density_of_states(const std::vector<RealisationRecord> &records,
                                             const std::string &boundary,
                                             const std::vector<double> &energies, double volume,
                                             Broadening kernel, double width);

  /**
   * Widths kept clear of the top of the computed spectrum: the Gaussian weight
   * beyond 6σ is below 1e-8; the Lorentzian one beyond kη is 1/(πk), so 30η
   * leaves about 1% of one state's weight per missing state.
   */
  double incomplete_margin(Broadening kernel);

  /**
   * A value attached to one level of one realisation, with the realisation's
   * likelihood ratio: the input of weighted_bin_means().
   */
  struct LevelValue
  {
    double        energy;
    double        value;
    double        weight = 1;      ///< @f$w_r@f$ of the realisation
    std::uint64_t realisation = 0; ///< index of the realisation (its cluster)
  };

  /** One energy bin of level statistics or IPR. */
  struct BinRow
  {
    double      lower, upper;   ///< bin [lower, upper)
    double      mean;           ///< NaN when count == 0
    double      standard_error; ///< NaN when count < 2
    std::size_t count;
  };

  /**
   * Mean ratio of consecutive level spacings per energy bin:
   * @f$r_i = \min(s_i, s_{i+1})/\max(s_i, s_{i+1})@f$, @f$s_i = \lambda_{i+1} - \lambda_i@f$,
   * from each realisation's own sorted spectrum (never across realisations),
   * the ratio assigned to the bin of its middle level @f$\lambda_{i+1}@f$ and
   * pooled over realisations. Needs no unfolding of the spectrum. Reference
   * values: Poisson (localised) @f$2\ln 2 - 1 \approx 0.3863@f$, GOE (extended)
   * @f$\approx 0.5307@f$ (Atas, Bogomolny, Giraud & Roux, PRL 110, 084101 (2013)).
   * Only levels up to complete_up_to are used; a triple with two equal levels
   * (0/0) is skipped. The standard error treats the ratios as independent,
   * which neighbouring ratios are not quite: it is a slight underestimate.
   * Weighted records (tilted sampling): see weighted_bin_means().
   */
  std::vector<BinRow> spacing_ratio_bins(const std::vector<RealisationRecord> &records,
                                         const std::string &boundary, double lower, double upper,
                                         double bin_width);

  /**
   * Mean inverse participation ratio @f$\int|\psi|^4/(\int|\psi|^2)^2@f$ of the
   * eigenfunctions with eigenvalue in each bin, pooled over realisations (only
   * eigenvalues up to complete_up_to; records without IPRs add nothing).
   * Weighted records (tilted sampling): see weighted_bin_means().
   */
  std::vector<BinRow> ipr_bins(const std::vector<RealisationRecord> &records,
                               const std::string &boundary, double lower, double upper,
                               double bin_width);

  /** Same, for given (eigenvalue, value) pairs: the binning used by both functions above. */
  std::vector<BinRow> bin_means(const std::vector<std::pair<double, double>> &samples,
                                double lower, double upper, double bin_width);

  /**
   * Per-bin means of level values from a weighted sample of @p realisations
   * realisations. The quantity estimated is a ratio of two expectations under
   * the model law p,
   * @f[ m_b = \frac{E_p[S_b]}{E_p[C_b]},\quad S_b = \sum_{j:\lambda_j\in b} v_j,\;
   *     C_b = \#\{j: \lambda_j \in b\}, @f]
   * (the mean IPR, or ⟨r⟩, of the levels of the ensemble that fall in bin b).
   * Its estimate is the ratio of the two unbiased importance-sampling
   * estimates, @f$\hat m_b = \sum_r w_r S_{b,r}/\sum_r w_r C_{b,r}@f$
   * (consistent, bias O(1/R): a ratio), with the linearised (delta-method)
   * standard error that treats realisations as the independent units,
   * @f[ \mathrm{SE}^2 = \frac{R}{R-1}\,\frac{\sum_r w_r^2 (S_{b,r} - \hat m_b C_{b,r})^2}
   *                     {(\sum_r w_r C_{b,r})^2} @f]
   * (the ratio estimator of survey sampling, e.g. Cochran, Sampling
   * Techniques, 3rd ed. 1977, §6.3; from memory). One weight multiplies all
   * levels of a realisation, so their errors are not independent.
   * When every weight is exactly 1 this is the plain pooled mean of
   * bin_means() (same numbers bit for bit, the standard error of the values
   * treated as independent, as before), so plain studies are unchanged.
   */
  std::vector<BinRow> weighted_bin_means(const std::vector<LevelValue> &samples,
                                         std::size_t realisations, double lower, double upper,
                                         double bin_width);

  /** @f$2\ln 2 - 1@f$: ⟨r⟩ for Poisson levels (Atas et al. 2013). */
  constexpr double spacing_ratio_poisson = 0.38629436111989061;
  /** ⟨r⟩ ≈ 0.5307 for the GOE (Atas et al. 2013, large-N value). */
  constexpr double spacing_ratio_goe = 0.5307;
} // namespace alloyspec
