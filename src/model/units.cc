/** @file units.cc  Reduced or physical units: parameters and energy conversions. */
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/units.h>

#include <deal.II/base/parameter_handler.h>

#include <cmath>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    /** Allowed effective masses, in electron masses: wide enough for any semiconductor band. */
    constexpr double min_effective_mass = 1e-3, max_effective_mass = 1e3;

    /** Electronvolts in one user energy unit. */
    double ev_per_unit(const UnitSystem::EnergyUnit unit)
    {
      return unit == UnitSystem::EnergyUnit::millielectronvolt ? 1e-3 : 1.0;
    }

    std::string fmt(const double x) { return short_number(x, 6); }
  } // namespace


  UnitSystem UnitSystem::physical(const double effective_mass, const double cell_size_nm,
                                  const EnergyUnit unit)
  {
    // Written as !(…) so that NaN is rejected as well.
    if (!(effective_mass >= min_effective_mass && effective_mass <= max_effective_mass))
      throw InputError("units/effective mass = " + fmt(effective_mass) +
                       " is outside the allowed range [" + fmt(min_effective_mass) + ", " +
                       fmt(max_effective_mass) + "] (electron masses)");
    if (!(cell_size_nm > 0.0) || !std::isfinite(cell_size_nm))
      throw InputError("lattice/cell size = " + fmt(cell_size_nm) +
                       " is not allowed in physical units, it must be a finite number > 0 "
                       "(nanometres)");
    UnitSystem units;
    units.physical_       = true;
    units.effective_mass_ = effective_mass;
    units.cell_size_nm_   = cell_size_nm;
    units.unit_           = unit;
    return units;
  }


  void UnitSystem::declare_parameters(dealii::ParameterHandler &prm)
  {
    using namespace dealii::Patterns;
    prm.enter_subsection("units");
    prm.declare_entry("system",
                      "reduced",
                      Selection("reduced|physical"),
                      "'reduced': hbar^2/2m = 1, lengths in the unit of 'lattice/cell size' "
                      "(cells when that is 1), energies in the matching unit. 'physical': "
                      "'lattice/cell size' is in nanometres, the particle has 'effective "
                      "mass', and every energy (potential values and files, energy grids, "
                      "eigenvalues in outputs) is in 'energy unit'.");
    prm.declare_entry("effective mass",
                      "0.067",
                      Double(min_effective_mass, max_effective_mass),
                      "Physical units: effective mass m* of the particle in electron masses, "
                      "in [0.001, 1000] (0.067 is the conduction band of GaAs).");
    prm.declare_entry("energy unit",
                      "eV",
                      Selection("eV|meV"),
                      "Physical units: unit of every energy given or written (electronvolt "
                      "or millielectronvolt).");
    prm.leave_subsection();
  }


  void UnitSystem::parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice)
  {
    prm.enter_subsection("units");
    const std::string system = prm.get("system");
    const double      mass   = prm.get_double("effective mass");
    const std::string unit   = prm.get("energy unit");
    prm.leave_subsection();

    if (system == "reduced")
      *this = UnitSystem();
    else if (system == "physical")
      {
        EnergyUnit energy_unit;
        if (unit == "eV")
          energy_unit = EnergyUnit::electronvolt;
        else if (unit == "meV")
          energy_unit = EnergyUnit::millielectronvolt;
        else
          throw InputError("units/energy unit: '" + unit + "' is not one of eV, meV");
        *this = physical(mass, lattice.cell_size(), energy_unit);
      }
    else
      throw InputError("units/system: '" + system + "' is not one of reduced, physical");
  }


  double UnitSystem::energy_scale() const
  {
    if (!physical_)
      throw std::logic_error("UnitSystem::energy_scale: reduced units have no scale in eV");
    return codata2018::hbar2_over_2me_ev_nm2 / (effective_mass_ * cell_size_nm_ * cell_size_nm_);
  }


  double UnitSystem::solver_energy_unit() const
  {
    if (!physical_)
      return 1.0;
    // Lengths of the solver are in nm: hbar^2/(2 m* nm^2), in the user's unit.
    return codata2018::hbar2_over_2me_ev_nm2 / effective_mass_ / ev_per_unit(unit_);
  }


  double UnitSystem::to_solver_energy(const double user_energy) const
  {
    return physical_ ? user_energy / solver_energy_unit() : user_energy;
  }


  std::vector<double> UnitSystem::to_solver_energies(std::vector<double> user_energies) const
  {
    for (double &e : user_energies)
      e = to_solver_energy(e);
    return user_energies;
  }


  double UnitSystem::to_user_energy(const double solver_energy) const
  {
    return physical_ ? solver_energy * solver_energy_unit() : solver_energy;
  }


  std::vector<double> UnitSystem::to_user_energies(std::vector<double> solver_energies) const
  {
    for (double &e : solver_energies)
      e = to_user_energy(e);
    return solver_energies;
  }


  std::string UnitSystem::energy_label() const
  {
    if (!physical_)
      return "reduced";
    return unit_ == EnergyUnit::millielectronvolt ? "meV" : "eV";
  }


  std::string UnitSystem::length_label() const
  {
    return physical_ ? "nm" : "reduced";
  }


  std::string UnitSystem::description() const
  {
    if (!physical_)
      return "reduced units (hbar^2/2m = 1, lengths in the unit of the cell size)";
    return "physical units: effective mass " + fmt(effective_mass_) + " m_e, cell size " +
           fmt(cell_size_nm_) + " nm, energies in " + energy_label() +
           " (hbar^2/(2 m a^2) = " + fmt(energy_scale()) + " eV)";
  }
} // namespace alloyspec
