/** @file sampling.cc  Parameters of subsection "sampling". */
#include <alloyspec/core/errors.h>
#include <alloyspec/model/sampling.h>

#include <deal.II/base/parameter_handler.h>

#include <cmath>
#include <cstdlib>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    bool parse_number(const std::string &text, double &value)
    {
      if (text.empty())
        return false;
      char *end = nullptr;
      value     = std::strtod(text.c_str(), &end);
      return end == text.c_str() + text.size() && std::isfinite(value);
    }

    std::string trimmed(const std::string &text)
    {
      const auto first = text.find_first_not_of(" \t");
      if (first == std::string::npos)
        return "";
      const auto last = text.find_last_not_of(" \t");
      return text.substr(first, last - first + 1);
    }
  } // namespace

  void SamplingSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("sampling");
    prm.declare_entry("method", "plain", dealii::Patterns::Selection("plain|tilted"),
                      "plain: cell values from the model law, every realisation counts "
                      "equally. tilted: cell values from the exponentially tilted law "
                      "p_θ(q) ∝ exp(−θ q) p(q), which makes the rare low-potential "
                      "configurations of the band tail common; each realisation carries its "
                      "log-likelihood ratio log w = θ Σ q_n + N log M(θ) (column log_weight of "
                      "realisations.csv) and every average is weighted by w, so the "
                      "estimates stay unbiased.");
    prm.declare_entry("tilt", "auto", dealii::Patterns::Anything(),
                      "θ for method = tilted, in inverse units of the energy unit "
                      "(|θ| ≤ 1e6; θ > 0 favours low cell values), or auto: chosen by a short "
                      "pilot to minimise the estimated relative variance of N(target energy).");
    prm.declare_entry("target energy", "", dealii::Patterns::Anything(),
                      "Energy (in the study's energy unit) whose IDS the automatic tilt "
                      "should estimate best; needed with tilt = auto. Empty: not set.");
    prm.declare_entry("tilt window", "box", dealii::Patterns::Anything(),
                      "box: method = tilted tilts every cell of the box. A whole number ℓ "
                      "(1 to 100000): each realisation tilts only the cells of one window of ℓ "
                      "cells per direction (fewer where the box is shorter), at a position inside "
                      "the box drawn uniformly, or no cell at all with probability 'untilted share'; the "
                      "weight is the exact ratio of the model law to this mixture (at most "
                      "1/untilted share). Suits tails made by a local region of low cells in "
                      "a long chain or a large box. auto: ℓ from 'target energy', the edge "
                      "(in cells) of the smallest empty cube with walls whose lowest level "
                      "lies at or below the target: ℓ = ⌈π √(d/(E − E₀)) / a⌉, E₀ the bottom "
                      "of the law, a the cell size.");
    prm.declare_entry("untilted share", "0.2", dealii::Patterns::Double(0.01, 0.99),
                      "With a tilt window: the share of realisations drawn untilted (0.01 to "
                      "0.99); it bounds every weight by 1/share.");
    prm.declare_entry("tilt shape", "flat", dealii::Patterns::Selection("flat|lowest mode"),
                      "How the tilt is spread over the tilted cells (the box, or the window). "
                      "flat: every tilted cell by θ. lowest mode: cell j by θ·φ_j, where φ is "
                      "the lowest mode of the empty box (or window) with walls, "
                      "∏ sin²(π x_i / s_i) integrated over each cell and scaled to 1 in the "
                      "centre: cells where a band-edge state lives are tilted most, cells by "
                      "the walls hardly at all. The weights stay exact either way.");
    prm.declare_entry("pilot realisations", "40", dealii::Patterns::Integer(8, 10000),
                      "Realisations of the pilot that chooses tilt = auto (8 to 10000). "
                      "They are solved at trial tilts and not kept in the sample.");
    prm.declare_entry("roulette", "off", dealii::Patterns::Selection("off|auto"),
                      "off: every realisation is solved. auto (method = tilted, count command "
                      "only): Russian roulette by the log-likelihood ratio. The first 'roulette "
                      "pilot' realisations are all solved; from their counts at the target energy "
                      "each bin of log w gets a probability r of being solved, proportional to the "
                      "root mean square of w N there and at least 'roulette floor'; bins of "
                      "larger log w than the one with the largest r are always solved. A later "
                      "realisation is solved with probability r and then weighted by w / r, or "
                      "not solved and weighted 0: the estimates stay unbiased, and solves are "
                      "spent where the tail's events are. Column survival of counts.csv holds r.");
    prm.declare_entry("roulette pilot", "400", dealii::Patterns::Integer(20, 1000000),
                      "Realisations solved before the roulette is set (20 to 1000000); they are "
                      "part of the sample.");
    prm.declare_entry("roulette bins", "5", dealii::Patterns::Integer(1, 100),
                      "Bins of log w, with equal numbers of pilot realisations (1 to 100).");
    prm.declare_entry("roulette floor", "0.2", dealii::Patterns::Double(0.01, 1.0),
                      "The least probability of being solved (0.01 to 1); a realisation's "
                      "variance can grow by at most 1 / floor where the pilot saw no event.");
    prm.leave_subsection();
  }

  void SamplingSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("sampling");
    method                    = prm.get("method") == "tilted" ? SamplingMethod::tilted
                                                              : SamplingMethod::plain;
    const std::string tilt_text   = trimmed(prm.get("tilt"));
    const std::string target_text = trimmed(prm.get("target energy"));
    pilot_realisations        = static_cast<unsigned int>(prm.get_integer("pilot realisations"));
    const std::string window_text = trimmed(prm.get("tilt window"));
    untilted_share            = prm.get_double("untilted share");
    tilt_shape = prm.get("tilt shape") == "lowest mode" ? TiltShape::lowest_mode : TiltShape::flat;
    roulette       = prm.get("roulette") == "auto";
    roulette_pilot = static_cast<unsigned int>(prm.get_integer("roulette pilot"));
    roulette_bins  = static_cast<unsigned int>(prm.get_integer("roulette bins"));
    roulette_floor = prm.get_double("roulette floor");
    prm.leave_subsection();
    if (roulette && method != SamplingMethod::tilted)
      throw InputError("sampling/roulette: auto needs sampling/method = tilted (plain "
                       "realisations all weigh 1, so there is nothing to steer by); allowed "
                       "with method = plain: off");

    tilt_window           = 0;
    tilt_window_automatic = window_text == "auto";
    if (window_text != "box" && !tilt_window_automatic)
      {
        double value = 0;
        if (!parse_number(window_text, value) || value != std::floor(value) || value < 1 ||
            value > 100000)
          throw InputError("sampling/tilt window: '" + window_text +
                           "' is not allowed; allowed are box, auto or a whole number of cells "
                           "from 1 to 100000");
        tilt_window = static_cast<unsigned int>(value);
      }

    automatic = false;
    tilt      = 0.0;
    target_energy.reset();
    if (!target_text.empty())
      {
        double value = 0;
        if (!parse_number(target_text, value))
          throw InputError("sampling/target energy: '" + target_text +
                           "' is not a finite number (allowed: empty or a number in the "
                           "study's energy unit)");
        target_energy = value;
      }
    if (tilt_text == "auto")
      automatic = true;
    else
      {
        double value = 0;
        if (!parse_number(tilt_text, value) || std::abs(value) > max_tilt)
          throw InputError("sampling/tilt: '" + tilt_text +
                           "' is not allowed; allowed are auto or a number in [-1e6, 1e6]");
        tilt = value;
      }
    if (method == SamplingMethod::tilted && tilt_window_automatic && !target_energy)
      throw InputError("sampling/target energy: must be set when sampling/tilt window = auto "
                       "(the window is sized for it), or give the window in cells");
    if (method == SamplingMethod::tilted && automatic && !target_energy)
      throw InputError("sampling/target energy: must be set when sampling/method = tilted and "
                       "sampling/tilt = auto (or give sampling/tilt as a number)");
  }

  std::string SamplingSettings::method_name() const
  {
    return method == SamplingMethod::tilted ? "tilted" : "plain";
  }
} // namespace alloyspec
