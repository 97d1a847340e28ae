#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/io/parameter_text.h>
#include <alloyspec/analysis/size_series.h>
#include <alloyspec/analysis/tail_table.h>
#include <alloyspec/analysis/deep_tail.h>
#include <alloyspec/analysis/local_trace.h>
#include <alloyspec/analysis/report.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <set>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    /**
     * Weights are called degenerate when their effective sample size is below
     * this share of the realisations (common practice, no source).
     */
    constexpr double min_effective_share = 0.1;

    /** Entries that may differ between folders of one model. */
    bool is_run_only(const std::string &key)
    {
      return key == "study/realisations" || key == "study/first realisation" ||
             key == "study/seed" || key.rfind("analysis/", 0) == 0;
    }

    std::vector<std::string> differences(const StoredStudy &a, const StoredStudy &b,
                                         bool allow_cells)
    {
      std::set<std::string> keys;
      for (const auto &[k, v] : a.parameters)
        keys.insert(k);
      for (const auto &[k, v] : b.parameters)
        keys.insert(k);
      std::vector<std::string> differ;
      for (const auto &k : keys)
        {
          if (is_run_only(k) || (allow_cells && k == "lattice/cells"))
            continue;
          // Studies at different tilts, combined by the balance heuristic.
          if (a.tilt_mixture && b.tilt_mixture && k.rfind("sampling/", 0) == 0)
            continue;
          const auto ia = a.parameters.find(k), ib = b.parameters.find(k);
          const std::string va = ia == a.parameters.end() ? "<absent>" : ia->second;
          const std::string vb = ib == b.parameters.end() ? "<absent>" : ib->second;
          if (va != vb)
            differ.push_back(k + " ('" + va + "' in " + a.directory + ", '" + vb + "' in " +
                             b.directory + ")");
        }
      return differ;
    }

    void refuse_overlap(const std::vector<StoredStudy> &group)
    {
      std::set<std::pair<std::uint64_t, std::uint64_t>> seen; // (seed, realisation)
      for (const auto &s : group)
        {
          std::set<std::uint64_t> own;
          for (const auto &r : s.input.records)
            own.insert(r.realisation);
          for (const auto r : own)
            if (!seen.insert({s.seed, r}).second)
              throw InputError("summarise: realisation " + std::to_string(r) + " of seed " +
                               std::to_string(s.seed) + " is stored in more than one folder (" +
                               s.directory +
                               "); merged samples must be independent (use disjoint "
                               "'study/first realisation' ranges or different seeds)");
        }
    }
  } // namespace

  std::string format_ids_table(const std::vector<std::string>                   &boundaries,
                               const std::vector<double>                        &energies,
                               const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                               const std::vector<double>                        &semiclassical,
                               const std::size_t                                 n_realisations)
  {
    auto index_of = [&](const std::string &name) -> int {
      const auto it = std::find(boundaries.begin(), boundaries.end(), name);
      return it == boundaries.end() ? -1 : static_cast<int>(it - boundaries.begin());
    };
    const int d = index_of("dirichlet"), n = index_of("neumann"), p = index_of("periodic");
    std::ostringstream csv;
    csv << "energy";
    for (const int b : {d, n, p})
      if (b >= 0)
        csv << ",ids_" << boundaries[b] << ",stderr_" << boundaries[b];
    if (d >= 0 && n >= 0)
      csv << ",width";
    for (const int b : {d, n, p})
      if (b >= 0)
        csv << ",complete_" << boundaries[b];
    csv << ",semiclassical,realisations\n";
    for (std::size_t i = 0; i < energies.size(); ++i)
      {
        csv << csv_number(energies[i]);
        // An incomplete count is only a lower bound: written as missing, never as a value.
        const auto value = [&](const int b, const double x) {
          return csv_number(rows[b][i].complete ? x : std::numeric_limits<double>::quiet_NaN());
        };
        for (const int b : {d, n, p})
          if (b >= 0)
            csv << ',' << value(b, rows[b][i].mean) << ',' << value(b, rows[b][i].standard_error);
        if (d >= 0 && n >= 0)
          csv << ','
              << csv_number(rows[d][i].complete && rows[n][i].complete ?
                              rows[n][i].mean - rows[d][i].mean :
                              std::numeric_limits<double>::quiet_NaN());
        for (const int b : {d, n, p})
          if (b >= 0)
            csv << ',' << (rows[b][i].complete ? 1 : 0);
        csv << ',' << csv_number(semiclassical[i]) << ',' << n_realisations << '\n';
      }
    return csv.str();
  }

  std::string weight_warning(const std::string &boundary, const IdsAccumulator &ids)
  {
    const double       ess = ids.weight_effective_sample_size();
    std::ostringstream message;
    message << "tilted sampling, " << boundary << ": effective sample size of the weights " << ess
            << " of " << ids.n_realisations() << " realisations, mean weight " << ids.mean_weight();
    // Degenerate weights: a few realisations carry the whole estimate.
    if (ess < min_effective_share * double(ids.n_realisations()))
      message << "; the weights are degenerate (few realisations dominate): read the "
                 "intervals with care, or choose a smaller tilt";
    return message.str();
  }

  std::vector<std::string> write_study_tables(const std::string              &output_dir,
                                              const std::vector<StoredStudy> &studies,
                                              const AnalysisSettings         &settings)
  {
    if (studies.empty())
      throw InputError("summarise: no study folder given");
    AnalysisInput merged = studies.front().input;
    merged.records.clear();
    std::vector<double> semiclassical(merged.energies.size(), 0.0);
    std::size_t         n_realisations = 0;
    for (const auto &s : studies)
      {
        merged.records.insert(merged.records.end(), s.input.records.begin(), s.input.records.end());
        for (std::size_t i = 0; i < semiclassical.size(); ++i)
          semiclassical[i] += s.semiclassical_sum[i];
        std::set<std::uint64_t> own;
        for (const auto &r : s.input.records)
          own.insert(r.realisation);
        n_realisations += own.size();
      }
    for (double &x : semiclassical)
      x /= std::max<std::size_t>(1, n_realisations);

    std::vector<IdsAccumulator> ids;
    for (std::size_t b = 0; b < merged.boundaries.size(); ++b)
      ids.emplace_back(merged.energies, merged.volume);
    for (const auto &r : merged.records)
      for (std::size_t b = 0; b < merged.boundaries.size(); ++b)
        if (r.boundary == merged.boundaries[b])
          ids[b].add(r.eigenvalues, r.complete_up_to, r.log_weight);
    std::vector<std::vector<IdsAccumulator::Row>> rows;
    for (const auto &a : ids)
      rows.push_back(a.rows());

    std::filesystem::create_directories(output_dir);
    ResultsStore::write_file_in(
      output_dir, "ids.csv",
      with_energy_columns(
        format_ids_table(merged.boundaries, merged.energies, rows, semiclassical, n_realisations),
        merged));

    ResultsStore::write_file_in(
      output_dir, "tail.csv",
      with_energy_columns(format_tail_table(merged.boundaries, rows, settings.confidence_level),
                          merged));

    std::vector<std::string> warnings;
    const bool weighted = std::any_of(merged.records.begin(), merged.records.end(),
                                      [](const RealisationRecord &r) { return r.log_weight != 0; });
    std::vector<WeightSummary> summaries;
    for (const auto &a : ids)
      summaries.push_back({a.n_realisations(), a.weight_effective_sample_size(), a.mean_weight()});
    if (weighted)
      for (std::size_t b = 0; b < ids.size(); ++b)
        warnings.push_back(weight_warning(merged.boundaries[b], ids[b]));
    // Every table below weights each realisation by its likelihood ratio, with
    // the same unbiased estimator as ids.csv (1 for plain sampling, which
    // leaves every number bit for bit). A weighted study's report opens with
    // the deep tail, its effective sample sizes and the estimator.
    ReportContent report;
    {
      const auto w = write_deep_tail(output_dir, merged, rows, summaries, settings,
                                     weighted ? &report : nullptr);
      warnings.insert(warnings.end(), w.begin(), w.end());
    }
    std::vector<std::string> chosen; // reported by write_analysis, which chooses the same
    write_local_trace_table(output_dir, merged, rows,
                            settings.resolved_for(merged.records, chosen).lorentzian_width);
    merged.ids_table = (std::filesystem::path(output_dir) / "ids.csv").string();
    const auto w = write_analysis(output_dir, merged, settings, std::move(report));
    warnings.insert(warnings.end(), w.begin(), w.end());
    return warnings;
  }

  std::vector<std::string> summarise_studies(const std::string              &output_dir,
                                             const std::vector<StoredStudy> &studies,
                                             const AnalysisSettings         &settings)
  {
    if (studies.empty())
      throw InputError("summarise: no study folder given");
    // Group by box; everything else must agree.
    std::map<std::string, std::vector<StoredStudy>> by_cells;
    for (const auto &s : studies)
      {
        const auto differ = differences(studies.front(), s, true);
        if (!differ.empty())
          {
            std::string message = "summarise: these folders describe different models; differing "
                                  "parameters:";
            for (const auto &x : differ)
              message += "\n  " + x;
            throw InputError(message);
          }
        by_cells[s.parameters.count("lattice/cells") ? s.parameters.at("lattice/cells") : ""]
          .push_back(s);
      }
    for (const auto &[cells, group] : by_cells)
      refuse_overlap(group);

    if (by_cells.size() == 1)
      return write_study_tables(output_dir, studies, settings);

    // A box-size series: one merged study per size, then the 1/L extrapolation
    // of the (weighted) means of every size.
    std::vector<std::string>   warnings;
    std::vector<AnalysisInput> per_size;
    for (const auto &[cells, group] : by_cells)
      {
        std::string folder = "box";
        for (const char c : cells)
          folder += (c == ',' ? 'x' : c);
        folder.erase(std::remove(folder.begin(), folder.end(), ' '), folder.end());
        const std::string dir = (std::filesystem::path(output_dir) / folder).string();
        const auto        w   = write_study_tables(dir, group, settings);
        warnings.insert(warnings.end(), w.begin(), w.end());
        AnalysisInput input = group.front().input;
        input.records.clear();
        for (const auto &s : group)
          input.records.insert(input.records.end(), s.input.records.begin(), s.input.records.end());
        input.ids_table = (std::filesystem::path(dir) / "ids.csv").string();
        per_size.push_back(std::move(input));
      }
    const auto w = write_size_series(output_dir, per_size, settings);
    warnings.insert(warnings.end(), w.begin(), w.end());
    return warnings;
  }
} // namespace alloyspec
