/** @file sampling.h  Subsection `sampling`: plain or tilted (importance) sampling of realisations. */
#pragma once

#include <alloyspec/model/tilt_profile.h>

#include <optional>
#include <string>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  /** How the cell values of a realisation are drawn. */
  enum class SamplingMethod
  {
    /** From the model law p: every realisation has weight 1. */
    plain,
    /**
     * From the exponentially tilted law @f$p_\theta(q) \propto e^{-\theta q}p(q)@f$
     * (SingleSiteLaw::tilted()); each realisation carries the log-likelihood
     * ratio @f$\ln w = \sum_n \ln\frac{p(q_n)}{p_\theta(q_n)} = \theta\sum_n q_n + N\ln M(\theta)@f$,
     * and averages are weighted by w (importance sampling; Rubinstein &
     * Kroese, Simulation and the Monte Carlo Method, ch. 5).
     */
    tilted
  };

  /**
   * Subsection `sampling`, owned here:
   * - `method` = plain | tilted (plain: exactly the untilted study);
   * - `tilt` = auto | θ, a number in inverse units of the study's energy unit
   *   (θ > 0 favours low cell values, i.e. the band bottom);
   * - `target energy` = E in the study's energy unit, for `tilt = auto`: the
   *   tilt is chosen by a short pilot to estimate N(E) best (tilt_choice.h);
   * - `pilot realisations`: size of that pilot;
   * - `tilt window` = box | ℓ: tilt every cell, or only a window of ℓ cells
   *   per direction at a random position (a defensive mixture with the
   *   untilted law, tilt_window.h); a window needs a given θ;
   * - `untilted share` = α in [0.01, 0.99]: the mixture's untilted share;
   * - `tilt shape` = flat | lowest mode: every tilted cell by θ, or cell j of
   *   the tilted region (box or window) by θ φ_j (tilt_profile.h);
   * - `roulette` = off | auto: Russian roulette of tilted realisations by
   *   their log-likelihood ratio (roulette.h), with `roulette pilot`,
   *   `roulette bins` and `roulette floor`; `count` only.
   */
  struct SamplingSettings
  {
    SamplingMethod        method    = SamplingMethod::plain;
    bool                  automatic = false;
    /** θ when given (or once chosen), in inverse units of the study's energy unit. */
    double                tilt      = 0.0;
    std::optional<double> target_energy;
    unsigned int          pilot_realisations = 40;
    /**
     * `tilt window`: box (0, every cell tilted) or the edge ℓ ≥ 1 in cells of
     * the window that one realisation tilts, at a random position, in the
     * defensive mixture of TiltWindows (tilt_window.h).
     */
    unsigned int          tilt_window = 0;
    /**
     * `tilt window = auto`: the edge is set from `target energy` by the
     * study model (window_for_energy(), tilt_choice.h); tilt_window is 0
     * until then.
     */
    bool                  tilt_window_automatic = false;
    /** `untilted share`: the mixture's share α of untilted realisations (window only). */
    double                untilted_share = 0.2;
    /** `tilt shape`. */
    TiltShape             tilt_shape = TiltShape::flat;
    /**
     * `roulette = auto`: the first `roulette pilot` realisations of a count
     * are all solved and set the survival table (Roulette::from_pilot) for
     * the rest, at the target energy.
     */
    bool                  roulette = false;
    /** `roulette pilot`: realisations solved before the table is set (they stay in the sample). */
    unsigned int          roulette_pilot = 400;
    /** `roulette bins`: bins of the log-likelihood ratio. */
    unsigned int          roulette_bins = 5;
    /** `roulette floor`: the least survival probability r_min. */
    double                roulette_floor = 0.2;

    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `sampling`; InputError naming the entry on bad input. */
    void        parse_parameters(dealii::ParameterHandler &prm);

    bool        is_tilted() const { return method == SamplingMethod::tilted; }
    /** "plain", "tilted" */
    std::string method_name() const;
  };

  /** Largest |θ| accepted by `sampling/tilt` (per energy unit). */
  constexpr double max_tilt = 1e6;
} // namespace alloyspec
