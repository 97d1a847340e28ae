#include <alloyspec/app/study_settings.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/model/energy_grid.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <string>

namespace alloyspec
{
  namespace
  {
    std::uint64_t parse_count(const std::string &text, const std::string &parameter,
                              std::uint64_t minimum, std::uint64_t maximum)
    {
      std::size_t        used  = 0;
      unsigned long long value = 0;
      try
        {
          if (text.find('-') == std::string::npos)
            value = std::stoull(text, &used);
        }
      catch (const std::exception &)
        {
          used = 0;
        }
      if (used == 0 || text.find_first_not_of(" \t", used) != std::string::npos ||
          value < minimum || value > maximum)
        throw InputError("parameter '" + parameter + "': '" + text +
                         "' is not allowed (an integer from " + std::to_string(minimum) +
                         " to " + std::to_string(maximum) + ")");
      return value;
    }

    constexpr std::uint64_t max_realisations = 4294967295ULL; // the stream counter holds 32 bits
  } // namespace

  void StudySettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("study");
    prm.declare_entry("realisations", "20", dealii::Patterns::Anything(),
                      "Number of independent realisations of the random potential (1 to "
                      "4294967295).");
    prm.declare_entry("first realisation", "0", dealii::Patterns::Anything(),
                      "Index of the first realisation. Studies with the same seed and disjoint "
                      "ranges of realisations can be merged.");
    prm.declare_entry("seed", "1", dealii::Patterns::Anything(),
                      "Seed of the counter-based random stream (0 to 2^64-1). The value of cell n "
                      "in realisation r depends only on (seed, r, n).");
    prm.declare_entry("energies", "auto", dealii::Patterns::Anything(),
                      "Energy grid of the IDS table, in the energy unit of the study: 'auto' "
                      "(about 200 points from the band bottom to the highest energy at which "
                      "every realisation's eigenvalues are verified complete, on a step of 1, 2, "
                      "2.5 or 5 times a power of ten), a range 'start to stop by step' (the stop "
                      "is included when it lies on the grid), or an ascending list 'E1, E2, "
                      "...'. The count and landscape commands need a range or a list.");
    prm.declare_entry("export eigenfunctions", "",
                      dealii::Patterns::List(dealii::Patterns::Integer(0, 100000), 0, 100),
                      "Indices (0 = lowest) of eigenfunctions to write as VTU files "
                      "(eigenfunctions_r<realisation>_<boundary>.vtu, with the cell potential as a "
                      "cell field) for the realisations in 'export realisations'. Empty: none.");
    prm.declare_entry("export realisations", "0",
                      dealii::Patterns::List(dealii::Patterns::Integer(0), 0, 100),
                      "Realisations whose eigenfunctions are exported (see 'export eigenfunctions').");
    prm.leave_subsection();
  }

  void StudySettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("study");
    realisations      = parse_count(prm.get("realisations"), "study/realisations", 1, max_realisations);
    first_realisation = parse_count(prm.get("first realisation"), "study/first realisation", 0,
                                    max_realisations - realisations);
    seed              = parse_count(prm.get("seed"), "study/seed", 0, ~0ULL);
    energies_text          = prm.get("energies");
    const auto first       = energies_text.find_first_not_of(" \t");
    const auto last        = energies_text.find_last_not_of(" \t");
    energies_from_spectrum = first != std::string::npos &&
                             energies_text.substr(first, last - first + 1) == "auto";
    energies.clear();
    if (!energies_from_spectrum)
      energies = parse_energy_grid(energies_text, "study/energies");
    export_eigenfunctions.clear();
    for (const auto &x : dealii::Utilities::split_string_list(prm.get("export eigenfunctions")))
      export_eigenfunctions.push_back(
        static_cast<unsigned int>(parse_count(x, "study/export eigenfunctions", 0, 100000)));
    export_realisations.clear();
    for (const auto &x : dealii::Utilities::split_string_list(prm.get("export realisations")))
      export_realisations.push_back(
        parse_count(x, "study/export realisations", 0, max_realisations - 1));
    prm.leave_subsection();
  }
} // namespace alloyspec
