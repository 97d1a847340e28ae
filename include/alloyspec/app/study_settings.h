/** @file study_settings.h  Subsection `study`: the sample of realisations and the energy grid. */
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  /** Subsection `study`: how many realisations, which seed, which energy grid. */
  struct StudySettings
  {
    std::uint64_t         realisations      = 20;
    std::uint64_t         first_realisation = 0;
    std::uint64_t         seed              = 1;
    /** The grid given by the user; empty when it follows the spectrum (energies_from_spectrum). */
    std::vector<double>   energies;
    std::string           energies_text = "auto";
    /**
     * `energies = auto`: the grid is made from the stored spectra, from the
     * band bottom to the highest energy at which every realisation's list is
     * verified complete (StudyModel::spectrum_grid()).
     */
    bool                  energies_from_spectrum = true;
    /** Eigenfunction indices written as VTU for the realisations below. */
    std::vector<unsigned int>  export_eigenfunctions;
    std::vector<std::uint64_t> export_realisations{0};

    static void declare_parameters(dealii::ParameterHandler &prm);
    void        parse_parameters(dealii::ParameterHandler &prm);
  };
} // namespace alloyspec
