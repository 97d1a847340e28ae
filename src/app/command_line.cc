#include <alloyspec/app/command_line.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/app/count.h>
#include <alloyspec/core/interrupt.h>
#include <alloyspec/app/landscape_study.h>
#include <alloyspec/core/progress.h>
#include <alloyspec/app/study.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/app/verify.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/folder_lock.h>
#include <alloyspec/io/parameter_text.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/model/energy_grid.h>

#include <deal.II/base/exceptions.h>
#include <deal.II/base/mpi.h>
#include <deal.II/base/parameter_handler.h>

#include <CLI/CLI.hpp>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <memory>
#include <map>
#include <optional>
#include <set>
#include <ctime>
#include <deque>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>

namespace alloyspec
{
  const char *const default_scenario = R"(# Embedded demo scenario (invented, not data): a binary alloy in which 20 % of
# the cells sit 1.5 energy units higher than the host (reduced units,
# hbar^2/2m = 1, lengths in cells). A 6 x 6 x 6 box, 10 realisations.
subsection lattice
  set cells = 6, 6, 6
  set cell size = 1
end
subsection potential
  set law = bernoulli
  set concentration = 0.2
  set value A = 1.5
  set value B = 0
end
subsection discretisation
  set degree = 2
  set elements per cell = 2
end
subsection spectrum
  set boundary conditions = dirichlet, neumann
  set eigenvalues = 40
end
subsection study
  set realisations = 10
  set seed = 1
  set energies = 0 to 3 by 0.05
end
)";

  namespace
  {
    /** The message part of a deal.II exception, without file and line. */
    std::string exception_text(const dealii::ExceptionBase &e)
    {
      std::ostringstream out;
      e.print_info(out);
      std::string text = out.str();
      while (!text.empty() && (text.back() == '\n' || text.back() == ' '))
        text.pop_back();
      const auto first = text.find_first_not_of(" \n");
      return first == std::string::npos ? text : text.substr(first);
    }

    /**
     * @p parsed.parse_parameters() (a Study, StudyModel or settings) with
     * deal.II's conversion errors reported as bad input: a value containing '{'
     * skips deal.II's pattern check (the syntax of its parameter loops), so
     * get_double() may be the first to see it.
     */
    template <class Parsed>
    void parse_checked(Parsed &parsed, dealii::ParameterHandler &prm)
    {
      // deal.II reads "{a|b}" as a loop over values (which we do not run) and
      // then skips the entry's pattern check, so a brace would reach our
      // parsers unchecked.
      std::ostringstream text;
      prm.print_parameters(text, dealii::ParameterHandler::ShortPRM);
      for (const auto &[key, value] : flatten_parameters(text.str()))
        if (value.find_first_of("{}") != std::string::npos)
          throw InputError("parameter '" + key + "': '" + value +
                           "' is not allowed: braces are not part of any value (see "
                           "'alloyspec parameters' for the entry's allowed values)");
      try
        {
          parsed.parse_parameters(prm);
        }
      catch (const dealii::ExceptionBase &e)
        {
          throw InputError("parameter file: " + exception_text(e) +
                           " (see 'alloyspec parameters' for every entry and its allowed values)");
        }
    }

    /**
     * Names data files (cell values, tabulated density, mesh) absolutely, so
     * that a stored study folder can be summarised or resumed from anywhere.
     */
    void make_data_paths_absolute(dealii::ParameterHandler &prm)
    {
      prm.enter_subsection("potential");
      for (const char *entry : {"file", "density file"})
        if (const std::filesystem::path file = prm.get(entry); !file.empty())
          prm.set(entry, std::filesystem::absolute(file).string());
      prm.leave_subsection();
      prm.enter_subsection("lattice");
      if (const std::filesystem::path mesh = prm.get("mesh file"); !mesh.empty())
        prm.set("mesh file", std::filesystem::absolute(mesh).string());
      prm.leave_subsection();
    }

    /** Applies "section/sub/entry=value". */
    void apply_override(dealii::ParameterHandler &prm, const std::string &assignment)
    {
      const auto equals = assignment.find('=');
      if (equals == std::string::npos)
        throw InputError("option '--set': '" + assignment +
                         "' is not of the form \"section/entry=value\"");
      std::string path  = assignment.substr(0, equals);
      std::string value = assignment.substr(equals + 1);
      auto trim = [](std::string &s) {
        s.erase(0, s.find_first_not_of(" \t"));
        s.erase(s.find_last_not_of(" \t") + 1);
      };
      trim(path);
      trim(value);
      std::vector<std::string> parts;
      std::stringstream        stream(path);
      for (std::string part; std::getline(stream, part, '/');)
        parts.push_back(part);
      if (parts.size() < 2)
        throw InputError("option '--set': '" + assignment +
                         "' must name a section and an entry, as \"section/entry=value\"");
      unsigned int entered = 0;
      try
        {
          for (std::size_t i = 0; i + 1 < parts.size(); ++i, ++entered)
            prm.enter_subsection(parts[i]);
          prm.set(parts.back(), value);
        }
      catch (const dealii::ParameterHandler::ExcEntryUndeclared &)
        {
          for (; entered > 0; --entered)
            prm.leave_subsection();
          throw InputError("option '--set': there is no such entry '" + parts.back() +
                           "' in section '" + path.substr(0, path.rfind('/')) +
                           "' (see 'alloyspec parameters' for every entry and its allowed values)");
        }
      catch (const dealii::ExceptionBase &e)
        {
          for (; entered > 0; --entered)
            prm.leave_subsection();
          throw InputError("option '--set': parameter '" + path + "' = '" + value +
                           "' is not accepted: " + exception_text(e) +
                           " (see 'alloyspec parameters' for every entry and its allowed values)");
        }
      for (; entered > 0; --entered)
        prm.leave_subsection();
    }

    /**
     * Follows the `include` lines of a parameter file (deal.II resolves them
     * against the working directory) and refuses a cycle or a chain deeper
     * than any sane one: deal.II itself recurses until the stack overflows
     * (a file that included itself died with a segmentation fault).
     */
    void check_includes(const std::filesystem::path &file, std::vector<std::string> &chain)
    {
      constexpr std::size_t max_depth = 16; // common practice, no source
      std::error_code       error;
      const std::string     id = std::filesystem::weakly_canonical(file, error).string();
      if (std::find(chain.begin(), chain.end(), id) != chain.end() || chain.size() >= max_depth)
        {
          std::string path;
          for (const auto &f : chain)
            path += "'" + f + "' includes ";
          throw InputError("parameter file '" + chain.front() + "': " + path + "'" + id + "'" +
                           (chain.size() >= max_depth ? ": more than 16 levels of 'include'" :
                                                        ", which includes itself again") +
                           " (allowed: includes that end)");
        }
      std::ifstream in(file);
      if (!in)
        return; // deal.II reports a file it cannot open
      chain.push_back(id);
      for (std::string line; std::getline(in, line);)
        {
          line.erase(std::min(line.find('#'), line.size()));
          const auto first = line.find_first_not_of(" \t");
          if (first == std::string::npos || line.compare(first, 8, "include ") != 0)
            continue;
          std::string name = line.substr(first + 8);
          name.erase(0, name.find_first_not_of(" \t"));
          name.erase(name.find_last_not_of(" \t\r") + 1);
          if (!name.empty())
            check_includes(name, chain);
        }
      chain.pop_back();
    }

    void read_parameters(dealii::ParameterHandler &prm, const std::string &config)
    {
      try
        {
          if (config.empty())
            prm.parse_input_from_string(default_scenario);
          else
            {
              if (!std::filesystem::exists(config))
                throw InputError("parameter file '" + config + "' does not exist");
              std::vector<std::string> chain;
              check_includes(config, chain);
              prm.parse_input(config, "", false);
              // A data file named in a parameter file is found next to it.
              prm.enter_subsection("potential");
              for (const char *entry : {"file", "density file"})
                {
                  const std::filesystem::path file = prm.get(entry);
                  if (!file.empty() && file.is_relative())
                    prm.set(entry, std::filesystem::absolute(
                                     std::filesystem::path(config).parent_path() / file)
                                     .string());
                }
              prm.leave_subsection();
              prm.enter_subsection("lattice");
              if (const std::filesystem::path mesh = prm.get("mesh file");
                  !mesh.empty() && mesh.is_relative())
                prm.set("mesh file",
                        std::filesystem::absolute(std::filesystem::path(config).parent_path() / mesh)
                          .lexically_normal()
                          .string());
              prm.leave_subsection();
            }
        }
      catch (const dealii::ExceptionBase &e)
        {
          throw InputError("parameter file '" + (config.empty() ? std::string("<embedded demo>") : config) +
                           "': " + exception_text(e) +
                           " (see 'alloyspec parameters' for every entry and its allowed values)");
        }
    }

    std::string to_short_prm(const dealii::ParameterHandler &prm)
    {
      std::ostringstream out;
      prm.print_parameters(out, dealii::ParameterHandler::ShortPRM);
      return out.str();
    }

    std::string to_json(const dealii::ParameterHandler &prm)
    {
      std::ostringstream out;
      prm.print_parameters(out, dealii::ParameterHandler::JSON);
      std::string text = out.str();
      while (!text.empty() && (text.back() == '\n' || text.back() == ' '))
        text.pop_back();
      return text;
    }
    /**
     * The entries that differ from their defaults, one "section/entry = value"
     * a line; the full set is in the output folder's parameter file.
     */
    void print_changed_parameters(const dealii::ParameterHandler &prm, const std::string &output)
    {
      dealii::ParameterHandler defaults;
      Study::declare_parameters(defaults);
      const auto now    = flatten_parameters(to_short_prm(prm));
      const auto before = flatten_parameters(to_short_prm(defaults));
      std::ostringstream changed;
      std::size_t        count = 0;
      for (const auto &[key, value] : now)
        {
          const auto it = before.find(key);
          if (it == before.end() || it->second != value)
            changed << "  " << key << " = " << value << '\n', ++count;
        }
      std::cout << count << " parameter(s) differ from the defaults (all of them: "
                << (std::filesystem::path(output) / ResultsStore::parameters_file).string() << ")"
                << (count ? ":\n" : "\n") << changed.str();
    }

    /** The closing lines the analysis left in key_numbers.json (nothing if it is absent). */
    void print_closing_summary(const std::string &folder)
    {
      const std::filesystem::path file = std::filesystem::path(folder) / "key_numbers.json";
      std::ifstream               in(file);
      if (!in)
        return;
      try
        {
          const Json key = Json::parse(in);
          if (key.contains("summary"))
            for (const auto &line : key["summary"])
              std::cout << line.get<std::string>() << '\n';
        }
      catch (const Json::exception &)
        {
          std::cout << "Results in " << folder << "/ (report.html)\n";
        }
    }
  } // namespace

  int run_command_line(int argc, char **argv)
  {
    const bool root = dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD) == 0;
    CLI::App   app{"alloyspec: eigenvalues and integrated density of states of random "
                 "Schrödinger operators -Δ + V on boxes of unit cells"};
    app.require_subcommand(1);
    app.set_version_flag("--version", std::string(ALLOYSPEC_VERSION));

    std::string              config, output;
    std::vector<std::string> overrides;
    std::string              seed;
    bool                     resume = false, no_progress = false, print_only = false;
    auto *run = app.add_subcommand("run", "Run a study: realisations, eigenvalues, IDS bracket.");
    run->add_option("config", config,
                    "Parameter file (deal.II format). Without it the embedded demo scenario runs.");
    run->add_option("-o,--output", output, "Folder for the results (must not hold an earlier study).")
      ->default_val("alloyspec-output");
    run->add_option("-s,--set", overrides,
                    "Override one parameter: \"section/entry=value\" (repeatable).");
    run->add_option("--seed", seed, "Override study/seed.");
    run->add_flag("--resume", resume,
                  "Continue an interrupted study in the same folder; stored realisations are kept.");
    run->add_flag("--no-progress", no_progress, "Never print the progress line.");
    unsigned int ranks_per_realisation = 1;
    run->add_option("--ranks-per-realisation", ranks_per_realisation,
                    "MPI ranks that solve each realisation together (a divisor of the number of "
                    "ranks; default 1: each rank solves its own realisations). With the iterative "
                    "solver the mesh itself is distributed: each rank of a team holds its part of "
                    "the mesh and of the matrices. With the direct solver the sparse "
                    "factorisation and the Krylov iteration are distributed, and the mesh and "
                    "assembly are repeated on each rank of a team.");
    double memory_budget_gib = -1; // -1: not given
    run->add_option("--memory-budget", memory_budget_gib,
                    "GiB of memory one rank may use for the discretisation that "
                    "'discretisation/accuracy' chooses (default: half the machine's memory, "
                    "shared by the ranks on it). When given, the iterative solver also checks "
                    "it on every rank before each block iteration: a rank whose rows of K and M "
                    "and block of vectors would exceed it stops the run on all ranks with exit "
                    "status 2, and the realisations stored so far are kept.");
    run->add_flag("--print-parameters", print_only,
                  "Print the effective parameters and stop without computing.");

    std::string count_config, count_output;
    std::vector<std::string> count_overrides;
    bool                     count_no_progress = false;
    auto *count = app.add_subcommand(
      "count", "IDS from inertia counts only (no eigenvectors; for large boxes): N(E) on the "
               "energy grid per realisation and boundary condition, plain or tilted sampling; writes "
               "counts.csv, ids.csv, tail.csv, run.json.");
    count->add_option("config", count_config,
                      "Parameter file (deal.II format). Without it the embedded demo scenario is used.");
    count->add_option("-o,--output", count_output, "Folder for the results (must be new or empty).")
      ->required();
    count->add_option("-s,--set", count_overrides,
                      "Override one parameter: \"section/entry=value\" (repeatable).");
    count->add_flag("--no-progress", count_no_progress, "Never print the progress line.");

    std::string              landscape_config, landscape_output;
    std::vector<std::string> landscape_overrides;
    bool                     landscape_no_progress = false;
    auto *landscape = app.add_subcommand(
      "landscape", "Landscape estimate: one linear solve (H + shift) u = 1 per realisation and "
                   "boundary condition instead of an eigen-solve; IDS estimate N_W(E) from "
                   "W = 1/u and eigenvalue estimates from the minima of W, compared with the "
                   "eigenvalues stored in the folder by 'alloyspec run' when there are any. "
                   "Writes landscape.csv, landscape_eigenvalues.csv, landscape.json.");
    landscape->add_option("config", landscape_config,
                          "Parameter file (deal.II format). Without it the embedded demo scenario "
                          "is used.");
    landscape->add_option("-o,--output", landscape_output,
                          "Folder for the results; may hold the same study run by 'alloyspec run'.")
      ->required();
    landscape->add_option("-s,--set", landscape_overrides,
                          "Override one parameter: \"section/entry=value\" (repeatable).");
    landscape->add_flag("--no-progress", landscape_no_progress, "Never print the progress line.");

    std::string format = "prm";
    auto *parameters = app.add_subcommand(
      "parameters", "Print every parameter with its description and default value.");
    parameters->add_option("--format", format, "prm or json")->check(CLI::IsMember({"prm", "json"}));
    auto *demo = app.add_subcommand("demo", "Print the embedded demo scenario's parameter file.");
    bool  thorough = false;
    auto *verify   = app.add_subcommand(
      "verify", "Check the solver against closed forms, exact 1D spectra and a dense reference "
                "solver; prints a table, exit status 0 only if every check passes.");
    verify->add_flag("--thorough", thorough, "Larger problems and more modes (slower).");

    std::vector<std::string> summary_inputs;
    std::string              summary_output;
    std::vector<std::string> summary_overrides;
    auto *summarise = app.add_subcommand(
      "summarise", "Recompute tables, figures and report from stored results, without solving; "
                   "merge folders of one model, or extrapolate a series of box sizes.");
    summarise->add_option("folders", summary_inputs, "Study folders written by 'alloyspec run'.")
      ->required();
    summarise->add_option("-o,--output", summary_output,
                          "Folder for the tables (default: the study folder itself when one is "
                          "given; required for several).");
    summarise->add_option("-s,--set", summary_overrides,
                          "Override an analysis parameter, e.g. \"analysis/lorentzian width=0.05\", "
                          "or study/energies (repeatable).");

    try
      {
        app.parse(argc, argv);
      }
    catch (const CLI::ParseError &e)
      {
        const int code = app.exit(e);
        return code == 0 ? 0 : 2;
      }

    try
      {
        dealii::ParameterHandler prm;
        Study::declare_parameters(prm);
        if (parameters->parsed())
          {
            if (root)
              prm.print_parameters(std::cout, format == "json" ? dealii::ParameterHandler::JSON
                                                               : dealii::ParameterHandler::PRM);
            return 0;
          }
        if (verify->parsed())
          {
            const auto checks = run_verification(thorough, std::cerr);
            return root ? print_verification(checks, std::cout) : 0;
          }
        if (demo->parsed())
          {
            if (root)
              std::cout << default_scenario;
            return 0;
          }
        if (summarise->parsed())
          {
            if (summary_output.empty())
              {
                if (summary_inputs.size() != 1)
                  throw InputError("option '--output' is required when several folders are "
                                   "summarised");
                summary_output = summary_inputs.front();
              }
            for (const auto &assignment : summary_overrides)
              {
                const std::string key = assignment.substr(0, assignment.find('='));
                if (key.rfind("analysis/", 0) != 0 && key != "study/energies")
                  throw InputError("option '--set' of summarise: '" + key +
                                   "' would change the model; only analysis/... entries and "
                                   "study/energies may be changed without solving again");
              }
            std::vector<StoredStudy> stored;
            std::deque<StudyModel>   models;
            std::vector<std::string> stored_texts; // each folder's stored parameters
            std::vector<double>      tilts; // θ of each folder, 0 for plain sampling
            AnalysisSettings         settings;
            for (const auto &folder : summary_inputs)
              {
                if (!std::filesystem::is_directory(folder))
                  throw InputError("summarise: '" + folder + "' is not a folder (allowed: "
                                   "study folders written by 'alloyspec run')");
                // Missing or empty: refused, never read as the defaults.
                (void)ResultsStore::read_stored_parameters(folder);
                const std::string file = ResultsStore::stored_parameters_path(folder);
                dealii::ParameterHandler stored_prm;
                Study::declare_parameters(stored_prm);
                read_parameters(stored_prm, file);
                // Earlier versions stored the grid as "a:h:b"; it means "a to b by h".
                stored_prm.enter_subsection("study");
                if (const auto words = energy_grid_in_words(stored_prm.get("energies")))
                  stored_prm.set("energies", *words);
                stored_prm.leave_subsection();
                for (const auto &assignment : summary_overrides)
                  apply_override(stored_prm, assignment);
                StudyModel &model = models.emplace_back();
                parse_checked(model, stored_prm);
                stored_texts.push_back(to_short_prm(stored_prm));
                if (models.size() == 1)
                  parse_checked(settings, stored_prm);
              }
            // Folders whose grid follows their spectra (study/energies = auto)
            // share one grid when tabulated together: from the lowest band
            // bottom to the lowest energy every folder verified.
            std::optional<std::vector<double>> shared_grid;
            if (models.size() > 1)
              {
                double lower = std::numeric_limits<double>::infinity();
                double upper = std::numeric_limits<double>::infinity();
                for (std::size_t k = 0; k < models.size(); ++k)
                  if (models[k].study().energies_from_spectrum)
                    {
                      const auto range = models[k].spectrum_range(summary_inputs[k]);
                      lower            = std::min(lower, range.first);
                      upper            = std::min(upper, range.second);
                    }
                if (std::isfinite(lower))
                  shared_grid = StudyModel::spectrum_grid(lower, upper);
              }
            for (std::size_t k = 0; k < models.size(); ++k)
              {
                const StudyModel &model = models[k];
                stored.push_back(model.describe_stored(
                  summary_inputs[k], stored_texts[k],
                  shared_grid && model.study().energies_from_spectrum ? &*shared_grid : nullptr));
                tilts.push_back(model.sampling().is_tilted() ? model.stored_tilt(summary_inputs[k]) :
                                                               0.0);
              }
            // Studies at different tilts: one estimate by the balance heuristic,
            // each realisation weighted by p/Σ_k (n_k/n) p_θk whatever it was drawn at.
            // The mixture is formed per box size (the folders of one
            // `lattice/cells`): a realisation's law is a product over its own
            // cells, so studies of another size are no component of it.
            if (std::any_of(tilts.begin(), tilts.end(), [&](double t) { return t != tilts.front(); }))
              {
                const auto box_of = [&](const std::size_t k) {
                  const auto it = stored[k].parameters.find("lattice/cells");
                  return it == stored[k].parameters.end() ? std::string() : it->second;
                };
                std::vector<std::size_t>           sizes;
                std::map<std::string, std::size_t> total;
                for (std::size_t k = 0; k < stored.size(); ++k)
                  {
                    std::set<std::uint64_t> own;
                    for (const auto &r : stored[k].input.records)
                      own.insert(r.realisation);
                    sizes.push_back(own.size());
                    total[box_of(k)] += own.size();
                  }
                std::size_t k = 0;
                for (auto &model : models)
                  {
                    // Each component is one study's own sampling law (tilt and window).
                    std::vector<StudyModel::TiltComponent> mixture;
                    for (std::size_t j = 0; j < stored.size(); ++j)
                      if (box_of(j) == box_of(k))
                        {
                          const auto &sj = models[j].sampling();
                          mixture.push_back({tilts[j], double(sizes[j]) / double(total.at(box_of(k))),
                                             sj.is_tilted() ? sj.tilt_window : 0u, sj.untilted_share,
                                             sj.tilt_shape});
                        }
                    model.apply_tilt_mixture(stored[k], mixture);
                    ++k;
                  }
                if (root)
                  std::cerr << "alloyspec: note: " << stored.size()
                            << " studies at different tilts combined by the balance heuristic "
                               "(multiple importance sampling)\n";
              }
            if (root)
              {
                std::error_code error;
                std::filesystem::create_directories(summary_output, error);
                if (error || !std::filesystem::is_directory(summary_output))
                  throw InputError("option '--output': cannot use '" + summary_output +
                                   "' as a folder" + (error ? ": " + error.message() : ""));
                // Nobody else writes there while the tables are rewritten.
                const FolderLock lock(summary_output, "summarise into it");
                for (const auto &warning : summarise_studies(summary_output, stored, settings))
                  std::cerr << "alloyspec: warning: " << warning << '\n';
                print_closing_summary(summary_output);
                std::cout << "These are model estimates for the stated model and box, not "
                             "measurements.\n";
              }
            return 0;
          }

        if (count->parsed())
          {
            read_parameters(prm, count_config);
            for (const auto &assignment : count_overrides)
              apply_override(prm, assignment);
            make_data_paths_absolute(prm);
            StudyModel model;
            parse_checked(model, prm);
            CountOptions count_options;
            count_options.output_directory = count_output;
            count_options.progress         = !count_no_progress && Progress::stderr_is_terminal();
            count_options.parameters_json  = to_json(prm);
            count_options.parameters_prm   = to_short_prm(prm);
            AnalysisSettings count_analysis;
            parse_checked(count_analysis, prm);
            count_options.confidence_level = count_analysis.confidence_level;
            run_inertia_count(model, count_options);
            if (root)
              std::cout << "Counts in " << count_output
                        << "/: counts.csv, ids.csv, tail.csv, run.json, " << ResultsStore::parameters_file
                        << "\n"
                        << "These are model estimates for the stated model and box, not "
                           "measurements.\n";
            return 0;
          }

        if (landscape->parsed())
          {
            read_parameters(prm, landscape_config);
            for (const auto &assignment : landscape_overrides)
              apply_override(prm, assignment);
            make_data_paths_absolute(prm);
            StudyModel model;
            parse_checked(model, prm);
            LandscapeSettings settings;
            parse_checked(settings, prm);
            LandscapeStudy job(model, settings);
            const auto lines =
              job.run(landscape_output, !landscape_no_progress && Progress::stderr_is_terminal());
            if (root)
              {
                for (const auto &line : lines)
                  std::cout << line << '\n';
                std::cout << "Results in " << landscape_output
                          << "/: landscape.csv, landscape_eigenvalues.csv, landscape.json\n"
                          << "These are model estimates for the stated model and box, not "
                             "measurements.\n";
              }
            return 0;
          }

        read_parameters(prm, config);
        for (const auto &assignment : overrides)
          apply_override(prm, assignment);
        // Given but empty is not "not given".
        if (run->get_option("--seed")->count() > 0)
          apply_override(prm, "study/seed=" + seed);
        make_data_paths_absolute(prm);

        Study study;
        parse_checked(study, prm);

        if (root)
          {
            prm.enter_subsection("study");
            const std::string effective_seed = prm.get("seed");
            prm.leave_subsection();
            std::cout << "alloyspec " << ALLOYSPEC_VERSION << ": "
                      << (config.empty() ? std::string("embedded demo scenario (invented)") : config)
                      << ", seed " << effective_seed << ", "
                      << dealii::Utilities::MPI::n_mpi_processes(MPI_COMM_WORLD) << " MPI rank(s)\n";
            if (print_only)
              prm.print_parameters(std::cout, dealii::ParameterHandler::ShortPRM);
            else
              print_changed_parameters(prm, output);
            std::cout.flush();
          }
        if (print_only)
          return 0;

        RunOptions options;
        options.output_directory = output;
        options.resume           = resume;
        options.ranks_per_realisation = ranks_per_realisation;
        if (memory_budget_gib != -1 && !(memory_budget_gib >= 0.01 && memory_budget_gib <= 1048576))
          throw InputError("option '--memory-budget': " + std::to_string(memory_budget_gib) +
                           " GiB is out of range; allowed: 0.01 to 1048576 (GiB per rank)");
        options.memory_budget_bytes = memory_budget_gib > 0 ? memory_budget_gib * 1073741824.0 : 0.0;
        options.progress         = !no_progress && Progress::stderr_is_terminal();
        options.parameters_json  = to_json(prm);
        options.parameters_prm   = to_short_prm(prm);
        // Kept up through the closing lines too: a stop request that comes
        // after the tables are written finds the study complete, and says so,
        // rather than killing the process in the middle of its summary.
        InterruptGuard late_signal_guard;
        study.run(options);
        if (root)
          {
            double total = 0;
            std::cout << "Timings:";
            bool first = true;
            for (const auto &[name, seconds] : study.phase_timings())
              {
                std::cout << (first ? " " : ", ") << name << ' ' << readable_seconds(seconds);
                total += seconds, first = false;
              }
            std::cout << " (total " << readable_seconds(total) << ")\n";
            if (study.tilted())
              std::cout << "Tilted sampling: every table, fit and figure is importance-weighted "
                           "(log_weight in realisations.csv); the report opens with the deep "
                           "tail and the effective sample sizes\n";
            print_closing_summary(output);
            std::cout << "These are model estimates for the stated model and box, not measurements.\n";
          }
        if (const int signal = InterruptGuard::received())
          {
            if (root)
              std::cerr << "alloyspec: " << signal_name(signal)
                        << " arrived after the tables were written: the study in '" << output
                        << "' is complete, nothing needs resuming\n";
            return 128 + signal;
          }
        InterruptGuard::hold_until_exit();
        return 0;
      }
    catch (const InputError &e)
      {
        if (root)
          std::cerr << "alloyspec: error: " << e.what() << '\n';
        return 2;
      }
    catch (const Interrupted &e)
      {
        // 128 + signal number, as a shell reports a process ended by it.
        if (root)
          std::cerr << "alloyspec: " << e.what()
                    << ". To continue, run the same command again with --resume added, e.g.\n  "
                    << "alloyspec run " << (config.empty() ? std::string() : config + " ")
                    << "--output " << output << " --resume [same --set options]\n";
        return 128 + e.signal();
      }
    catch (const dealii::ExceptionBase &e)
      {
        if (root)
          std::cerr << "alloyspec: computation failed: " << exception_text(e) << '\n';
        return 1;
      }
    catch (const std::exception &e)
      {
        if (root)
          std::cerr << "alloyspec: computation failed: " << e.what() << '\n';
        return 1;
      }
  }
} // namespace alloyspec
