/** @file tilt_pilot.cc  Study::choose_tilt: the automatic tilt from a short pilot (multilevel cross-entropy). */
#include <alloyspec/app/study.h>
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
    /** Levels of the multilevel method before it gives up lowering the level. */
    constexpr unsigned int max_levels = 8;
    /** File in the output folder holding the chosen tilt. */
    constexpr const char *tilt_file = "tilt.txt";

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

    std::string full(const double x)
    {
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.17g", x);
      return buffer;
    }
  } // namespace

  double Study::stored_tilt(const std::string &directory) const
  {
    if (!sampling_.automatic)
      return sampling_.tilt;
    const auto    path = std::filesystem::path(directory) / tilt_file;
    std::ifstream in(path);
    double        theta = 0;
    if (!(in >> theta) || !std::isfinite(theta))
      throw InputError("folder '" + directory + "': sampling/tilt = auto, but " + tilt_file +
                       " (the tilt the study chose) is missing or unreadable; the weights "
                       "cannot be reconstructed");
    return theta;
  }

  void Study::choose_tilt(const ResultsStore &store, const RunOptions &options, const bool root)
  {
    // A resumed study keeps the tilt it was started with.
    if (options.resume && std::filesystem::exists(store.path(tilt_file)))
      {
        sampling_.tilt = stored_tilt(store.directory());
        potential_.set_tilt(sampling_.tilt);
        tilt_log_ = "reused from " + std::string(tilt_file) + " (resumed study)";
        if (root)
          std::cout << "Tilt " << sampling_.tilt << " reused from the stored study" << std::endl;
        return;
      }
    const double      target = units_.to_solver_energy(*sampling_.target_energy);
    const std::size_t pilot  = sampling_.pilot_realisations;
    const std::size_t n_elite =
      std::max<std::size_t>(1, static_cast<std::size_t>(std::ceil(elite_share * pilot)));
    std::ostringstream log;
    double             theta   = 0;
    bool               reached = false;
    for (unsigned int level = 0; level < max_levels && !reached; ++level)
      {
        potential_.set_tilt(theta);
        std::vector<PilotSample> samples(pilot);
        std::vector<double>      scores(pilot);
        for (std::size_t p = 0; p < pilot; ++p)
          {
            const std::uint64_t r = first_pilot_realisation + level * pilot + p;
            const std::vector<double> q_user = potential_.cell_values(study_.seed, r);
            samples[p].mean_cell_value =
              std::accumulate(q_user.begin(), q_user.end(), 0.0) / q_user.size();
            samples[p].log_weight = potential_.log_weight(q_user);
            discretisations_[0]->assemble_potential(units_.to_solver_energies(q_user),
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
            "sampling/tilt = auto: no pilot realisation at tilt " + full(theta) +
            " has an eigenvalue below spectrum/energy cutoff; raise the cutoff, or give "
            "sampling/tilt as a number");
        std::vector<PilotSample> elite;
        for (std::size_t p = 0; p < pilot; ++p)
          if (scores[p] <= level_energy)
            elite.push_back(samples[p]);
        reached = level_energy <= target;
        const double next = cross_entropy_tilt(*potential_.law(), elite, max_tilt);
        log << "level " << level << ": tilt " << theta << ", elite " << elite.size() << " of "
            << pilot << " with lowest eigenvalue <= " << units_.to_user_energy(level_energy)
            << ", next tilt " << next << "; ";
        theta = next;
      }
    theta          = rounded(theta);
    sampling_.tilt = theta;
    potential_.set_tilt(theta);
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
        store.write_file(tilt_file, full(theta) + "\n");
      }
  }
} // namespace alloyspec
