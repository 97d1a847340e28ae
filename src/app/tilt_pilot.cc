/** @file tilt_pilot.cc  Study::choose_tilt: the automatic tilt from a short pilot (multilevel cross-entropy). */
#include <alloyspec/app/study.h>
#include <alloyspec/core/format.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/model/tilt_choice.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <limits>
#include <numeric>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    /** Pilot realisations are numbered from here: far above any study's own. */
    constexpr std::uint64_t first_pilot_realisation = std::uint64_t(1) << 48;
    /**
     * Share of the pilot kept as the elite at each level (ρ of the
     * cross-entropy method; 0.1 is the usual choice, de Boer et al. 2005).
     */
    constexpr double elite_share = 0.1;
    /**
     * Levels of the multilevel method before it gives up lowering the level.
     * A staircase spectrum (binary chains: runs of wells give fixed levels)
     * can hold a level for several steps, so the pilot may need many.
     */
    constexpr unsigned int max_levels = 20;

    /**
     * The chosen θ rounded to 4 significant digits: a team's distributed sums
     * round differently, and a tilt differing in the last bits must not make
     * two runs of one study differ.
     */
    double rounded(const double theta)
    {
      if (theta == 0.0)
        return 0.0;
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.4g", theta);
      return std::strtod(buffer, nullptr);
    }

  } // namespace

  void Study::choose_tilt(const ResultsStore &store, const RunOptions &options, const bool root)
  {
    // A resumed study keeps the tilt it was started with.
    if (options.resume && std::filesystem::exists(store.path(StudyModel::tilt_file)))
      {
        model_.set_tilt(model_.stored_tilt(store.directory()));
        tilt_log_ = "reused from " + std::string(StudyModel::tilt_file) + " (resumed study)";
        if (root)
          std::cout << "Tilt " << model_.sampling().tilt << " reused from the stored study" << std::endl;
        return;
      }
    const double      target = model_.units().to_solver_energy(*model_.sampling().target_energy);
    const std::size_t pilot  = model_.sampling().pilot_realisations;
    const std::size_t n_elite =
      std::max<std::size_t>(1, static_cast<std::size_t>(std::ceil(elite_share * pilot)));
    std::ostringstream log;
    double             theta   = 0;
    bool               reached = false;
    for (unsigned int level = 0; level < max_levels && !reached; ++level)
      {
        model_.set_tilt(theta);
        const bool                     windows = model_.potential().tilt_window() > 0;
        std::vector<PilotSample>       samples(pilot);
        std::vector<WindowPilotSample> window_samples(windows ? pilot : 0);
        std::vector<double>            scores(pilot);
        for (std::size_t p = 0; p < pilot; ++p)
          {
            const std::uint64_t r = first_pilot_realisation + level * pilot + p;
            const std::vector<double> q_user = model_.potential().cell_values(model_.study().seed, r);
            samples[p].log_weight = model_.potential().log_weight(q_user);
            if (windows)
              window_samples[p] = {model_.potential().window_means(q_user), samples[p].log_weight};
            else
              samples[p].mean_cell_value = model_.potential().profile_mean(q_user);
            discretisations_[0]->assemble_potential(model_.units().to_solver_energies(q_user),
                                                    *problems_[0]);
            const EigenResult result = solver_->solve(*problems_[0]);
            // No eigenvalue below the cutoff: above every level of interest.
            scores[p] = result.eigenvalues.empty() ? std::numeric_limits<double>::infinity()
                                                   : result.eigenvalues.front();
          }
        std::vector<double> sorted(scores);
        std::sort(sorted.begin(), sorted.end());
        const double level_energy = std::max(target, sorted[n_elite - 1]);
        if (!std::isfinite(level_energy))
          throw InputError(
            "sampling/tilt = auto: no pilot realisation at tilt " + csv_number(theta) +
            " has an eigenvalue below spectrum/energy cutoff; raise the cutoff, or give "
            "sampling/tilt as a number");
        std::vector<PilotSample>       elite;
        std::vector<WindowPilotSample> window_elite;
        for (std::size_t p = 0; p < pilot; ++p)
          if (scores[p] <= level_energy)
            {
              if (windows)
                window_elite.push_back(window_samples[p]);
              else
                elite.push_back(samples[p]);
            }
        reached = level_energy <= target;
        // With windows the sampling law is a mixture: the update by expectation–maximisation.
        const double next =
          windows ? cross_entropy_window_tilt(*model_.potential().law(), window_elite,
                                              model_.potential().tilt_profile(),
                                              model_.sampling().untilted_share, theta, max_tilt)
                  : cross_entropy_tilt(*model_.potential().law(), elite, max_tilt,
                                       &model_.potential().tilt_profile());
        log << "level " << level << ": tilt " << theta << ", elite " << (windows ? window_elite.size() : elite.size()) << " of "
            << pilot << " with lowest eigenvalue <= " << model_.units().to_user_energy(level_energy)
            << ", next tilt " << next << "; ";
        theta = next;
      }
    theta          = rounded(theta);
    model_.set_tilt(theta);
    log << (reached ? "target energy reached" : "target energy NOT reached within " +
                                                  std::to_string(max_levels) +
                                                  " levels: the tilt is the last level's")
        << "; chosen tilt " << theta;
    tilt_log_ = log.str();
    if (root)
      {
        std::cout << "Automatic tilt (" << pilot << " pilot realisations per level): " << tilt_log_
                  << std::endl;
        if (!reached)
          std::cerr << "alloyspec: warning: the automatic tilt did not reach sampling/target "
                       "energy; the estimate there may have degenerate weights\n";
        store.write_file(StudyModel::tilt_file, csv_number(theta) + "\n");
        wrote_tilt_ = true;
      }
  }
} // namespace alloyspec
