/** @file units.h  Reduced or physical (eV, nm, effective mass) units for energies and lengths. */
#pragma once

#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  class Lattice;

  /** CODATA 2018 values (h, e exact by the 2019 SI; mₑ recommended). */
  namespace codata2018
  {
    /** @f$\hbar@f$ in J s (h / 2π with h = 6.62607015e-34 J s exact). */
    constexpr double reduced_planck_constant = 1.054571817e-34;
    /** @f$m_e@f$ in kg. */
    constexpr double electron_mass = 9.1093837015e-31;
    /** @f$e@f$ in C (exact); also the number of joules in one eV. */
    constexpr double elementary_charge = 1.602176634e-19;
    /**
     * @f$\hbar^2/(2 m_e)@f$ in eV nm² (= 0.0380998 eV nm² = 3.80998 eV Å²),
     * from the three values above.
     */
    constexpr double hbar2_over_2me_ev_nm2 = reduced_planck_constant * reduced_planck_constant /
                                             (2.0 * electron_mass) / elementary_charge * 1e18;
  } // namespace codata2018

  /**
   * The units of a study (subsection `units`).
   *
   * The solver always solves @f$-\Delta u + V u = \lambda u@f$ on the box of
   * the lattice as given, i.e. in "solver units": @f$\hbar^2/(2m) = 1@f$ and
   * lengths in the unit of `lattice/cell size`.
   *
   * - `system = reduced` (default): that is all; energies (potential values,
   *   eigenvalues, energy grids) are in solver units and every conversion
   *   here is the identity. With `lattice/cell size = 1` these are the usual
   *   reduced units (lengths in cells, @f$\hbar^2/2m = 1@f$).
   * - `system = physical`: `lattice/cell size` is the edge a of one cell in
   *   nanometres, so lengths (box extents, volumes in densities of states)
   *   are in nm; the particle has mass @f$m^* m_e@f$ (`effective mass`);
   *   every energy the user gives or reads (all entries of subsection
   *   `potential`, the values in cell-values and density files, energy grids,
   *   eigenvalues in outputs) is in `energy unit` (eV or meV). One solver
   *   energy unit is then @f$\hbar^2/(2 m^* m_e\,\mathrm{nm}^2)@f$
   *   = 0.0380998 eV / m*, and to_solver_energy() / to_user_energy()
   *   convert between it and the user's unit. A separate cell-size entry is
   *   deliberately not offered: one length in one place cannot disagree with
   *   the mesh.
   *
   * energy_scale() is the natural energy of one cell,
   * @f$E_{\rm unit} = \hbar^2/(2 m^* m_e a^2)@f$ in eV: the unit of
   * eigenvalues computed on a lattice of cell size 1 (lengths in cells).
   */
  class UnitSystem
  {
  public:
    enum class EnergyUnit
    {
      electronvolt,
      millielectronvolt
    };

    /** Reduced units (the default). */
    UnitSystem() = default;
    /**
     * Physical units: effective mass @p effective_mass (in electron masses,
     * in [1e-3, 1e3]), cell edge @p cell_size_nm (> 0, nm), energies in
     * @p unit. Throws InputError naming `units/...` otherwise.
     */
    static UnitSystem physical(double effective_mass, double cell_size_nm, EnergyUnit unit);

    /** Declares subsection `units`: `system`, `effective mass`, `energy unit`. */
    static void declare_parameters(dealii::ParameterHandler &prm);
    /**
     * Reads subsection `units`; in physical units @p lattice's cell size is
     * the cell edge in nm. Call after Lattice::parse_parameters().
     */
    void parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice);

    bool   is_physical() const { return physical_; }
    /** @f$m^*@f$ in electron masses (physical units only; 1 in reduced units). */
    double effective_mass() const { return effective_mass_; }
    /** Cell edge a in nm (physical units only). */
    double cell_size_nm() const { return cell_size_nm_; }

    /**
     * @f$E_{\rm unit} = \hbar^2/(2 m^* m_e a^2)@f$ in eV, the energy of one
     * reduced unit (lengths in cells). Throws std::logic_error in reduced
     * units, which have no scale in eV.
     */
    double energy_scale() const;
    /**
     * Size of one solver energy unit in the user's energy unit:
     * @f$\hbar^2/(2 m^* m_e\,\mathrm{nm}^2)@f$ in eV or meV; 1 in reduced units.
     */
    double solver_energy_unit() const;

    /** An energy (potential value, grid point) from the user's unit to solver units. */
    double              to_solver_energy(double user_energy) const;
    /** to_solver_energy() of each entry (e.g. a realisation's cell values). */
    std::vector<double> to_solver_energies(std::vector<double> user_energies) const;
    /** An energy (eigenvalue) from solver units to the user's unit. */
    double              to_user_energy(double solver_energy) const;
    /** to_user_energy() of each entry (e.g. a list of eigenvalues). */
    std::vector<double> to_user_energies(std::vector<double> solver_energies) const;

    /** Energy label for CSV headers and figure axes: "eV", "meV" or "reduced". */
    std::string energy_label() const;
    /** Length label: "nm" or "reduced". */
    std::string length_label() const;
    /** One line for manifests, e.g. "physical: m* = 0.067 m_e, a = 0.5 nm, energies in meV (E_unit = ...)". */
    std::string description() const;

  private:
    bool       physical_       = false;
    double     effective_mass_ = 1.0;
    double     cell_size_nm_   = 1.0;
    EnergyUnit unit_           = EnergyUnit::electronvolt;
  };
} // namespace alloyspec
