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
    std::vector<double>   energies;
    std::string           energies_text = "0 to 10 by 0.1";
    /** Eigenfunction indices written as VTU for the realisations below. */
    std::vector<unsigned int>  export_eigenfunctions;
    std::vector<std::uint64_t> export_realisations{0};

    static void declare_parameters(dealii::ParameterHandler &prm);
    void        parse_parameters(dealii::ParameterHandler &prm);
  };
} // namespace alloyspec
