// Unit tests of UnitSystem: the CODATA constant, conversions and their round
// trips, a free-box eigenvalue against SI, parameters.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/units.h>

#include <deal.II/base/parameter_handler.h>

#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <string>
#include <vector>

namespace
{
  using alloyspec::InputError;
  using alloyspec::Lattice;
  using alloyspec::UnitSystem;
  namespace codata = alloyspec::codata2018;

  constexpr double pi = 3.141592653589793238462643383279502884;
  /**
   * ħ²/(2mₑ) = 3.80998 eV Å² as usually quoted (from memory), six
   * significant digits: the rounding of the last digit allows 5e-6 eV Å².
   */
  constexpr double quoted_hbar2_over_2me_ev_angstrom2 = 3.80998;
  constexpr double quoted_rounding                    = 5e-6;
  /** Products and quotients of a few doubles: only rounding differs. */
  constexpr double relative_rounding = 1e-14;

  /** Declares, fills subsections units and lattice, parses both. */
  UnitSystem parse(const std::string &units_body, const std::string &lattice_body = "")
  {
    dealii::ParameterHandler prm;
    Lattice::declare_parameters(prm);
    UnitSystem::declare_parameters(prm);
    prm.parse_input_from_string("subsection lattice\n" + lattice_body +
                                "\nend\nsubsection units\n" + units_body + "\nend\n");
    Lattice lattice;
    lattice.parse_parameters(prm);
    UnitSystem units;
    units.parse_parameters(prm, lattice);
    return units;
  }

  std::string input_error_message(const std::function<void()> &f)
  {
    try
      {
        f();
      }
    catch (const InputError &e)
      {
        return e.what();
      }
    return "";
  }
} // namespace


TEST(Units, ConstantFromCodata2018)
{
  // Recomputed in SI from the CODATA 2018 values (from memory): J m² → eV Å².
  const double hbar = 1.054571817e-34, m_e = 9.1093837015e-31, e = 1.602176634e-19;
  const double si   = hbar * hbar / (2.0 * m_e);  // J m²
  const double ev_angstrom2 = si / e / 1e-20;
  EXPECT_NEAR(ev_angstrom2, quoted_hbar2_over_2me_ev_angstrom2, quoted_rounding);
  // 1 nm² = 100 Å².
  EXPECT_NEAR(codata::hbar2_over_2me_ev_nm2, ev_angstrom2 / 100.0,
              relative_rounding * ev_angstrom2 / 100.0);
  // h = 2πħ = 6.62607015e-34 J s exactly in the 2019 SI. CODATA quotes ħ
  // truncated to 10 digits ("1.054571817..."), so the exact h/(2π) exceeds
  // the quoted value by less than one unit of the last digit, 1e-43 J s.
  const double hbar_exact = 6.62607015e-34 / (2.0 * pi);
  EXPECT_GE(hbar_exact - hbar, 0.0);
  EXPECT_LT(hbar_exact - hbar, 1e-43);
}


TEST(Units, ReducedIsTheIdentity)
{
  const UnitSystem units;
  EXPECT_FALSE(units.is_physical());
  EXPECT_EQ(units.to_solver_energy(3.25), 3.25);
  EXPECT_EQ(units.to_user_energy(-1.5), -1.5);
  EXPECT_EQ(units.solver_energy_unit(), 1.0);
  EXPECT_EQ(units.energy_label(), "reduced");
  EXPECT_EQ(units.length_label(), "reduced");
  EXPECT_THROW(units.energy_scale(), std::logic_error);
}


TEST(Units, EnergyScaleIsHbarSquaredOver2MA2)
{
  const double m = 0.067, a = 0.5;
  const auto   units = UnitSystem::physical(m, a, UnitSystem::EnergyUnit::electronvolt);
  // Directly in SI: ħ²/(2 m* mₑ a²) in J, then eV.
  const double hbar = 1.054571817e-34, m_e = 9.1093837015e-31, e = 1.602176634e-19;
  const double a_m  = a * 1e-9;
  const double expected = hbar * hbar / (2.0 * m * m_e * a_m * a_m) / e;
  EXPECT_NEAR(units.energy_scale(), expected, relative_rounding * expected);
  // About 2.27 eV for GaAs-like mass and half-nanometre cells.
  EXPECT_NEAR(units.energy_scale(), 2.2746, 1e-3);
}


TEST(Units, RoundTripsAndMilli)
{
  const auto ev  = UnitSystem::physical(0.2, 0.3, UnitSystem::EnergyUnit::electronvolt);
  const auto mev = UnitSystem::physical(0.2, 0.3, UnitSystem::EnergyUnit::millielectronvolt);
  for (const double x : {-3.7, -1e-3, 0.0, 0.25, 1.0, 42.0, 1e5})
    {
      EXPECT_NEAR(ev.to_user_energy(ev.to_solver_energy(x)), x, relative_rounding * std::abs(x));
      EXPECT_NEAR(ev.to_solver_energy(ev.to_user_energy(x)), x, relative_rounding * std::abs(x));
      EXPECT_NEAR(mev.to_user_energy(mev.to_solver_energy(x)), x,
                  relative_rounding * std::abs(x));
      // The same solver energy reads 1000 times larger in meV.
      EXPECT_NEAR(mev.to_user_energy(x), 1000.0 * ev.to_user_energy(x),
                  relative_rounding * std::abs(1000.0 * ev.to_user_energy(x)));
    }
  const std::vector<double> values = {0.1, 0.2, -0.4};
  const std::vector<double> back   = ev.to_user_energies(ev.to_solver_energies(values));
  for (std::size_t i = 0; i < values.size(); ++i)
    EXPECT_NEAR(back[i], values[i], relative_rounding * std::abs(values[i]));
  EXPECT_EQ(ev.energy_label(), "eV");
  EXPECT_EQ(mev.energy_label(), "meV");
  EXPECT_EQ(ev.length_label(), "nm");
}


TEST(Units, FreeBoxGroundStateMatchesSI)
{
  // Cube of L = 8 cells of a = 0.5 nm, m* = 0.067: the solver sees a box of
  // edge 4 (nm) and finds the Dirichlet ground state 3π²/4² in solver units.
  const double     m = 0.067, a = 0.5;
  const Lattice    lattice({8, 8, 8}, a);
  const double     edge   = lattice.extents()[0];
  const double     lambda = 3.0 * pi * pi / (edge * edge);
  for (const auto unit : {UnitSystem::EnergyUnit::electronvolt,
                          UnitSystem::EnergyUnit::millielectronvolt})
    {
      const auto   units = UnitSystem::physical(m, a, unit);
      const double scale = unit == UnitSystem::EnergyUnit::electronvolt ? 1.0 : 1e3;
      // ħ²π²·3/(2 m* mₑ L²) directly in SI, L = 8 a = 4e-9 m.
      const double hbar = 1.054571817e-34, m_e = 9.1093837015e-31, e = 1.602176634e-19;
      const double length   = 8 * a * 1e-9;
      const double expected = scale * hbar * hbar * pi * pi * 3.0 / (2.0 * m * m_e * length * length) / e;
      EXPECT_NEAR(units.to_user_energy(lambda), expected, relative_rounding * expected);
      // Same number from the lengths-in-cells view: λ_cells = 3π²/8², times E_unit.
      EXPECT_NEAR(3.0 * pi * pi / 64.0 * units.energy_scale() * scale, expected,
                  relative_rounding * expected);
    }
}


TEST(Units, ConstantPotentialShiftsEigenvaluesInAnyUnit)
{
  // With V = q constant every eigenvalue moves by q: converting q in and the
  // shifted eigenvalue out must give back the user's shift.
  const auto   units = UnitSystem::physical(0.067, 0.5, UnitSystem::EnergyUnit::millielectronvolt);
  const double q_mev = 150.0, lambda0 = 1.85;
  const double shifted = lambda0 + units.to_solver_energy(q_mev);
  EXPECT_NEAR(units.to_user_energy(shifted) - units.to_user_energy(lambda0), q_mev,
              relative_rounding * 1e3);
}


TEST(Units, ParsesBothSystems)
{
  const UnitSystem reduced = parse("");
  EXPECT_FALSE(reduced.is_physical());

  const UnitSystem physical =
    parse("set system = physical\nset effective mass = 0.2\nset energy unit = meV",
          "set cell size = 0.25");
  ASSERT_TRUE(physical.is_physical());
  EXPECT_EQ(physical.effective_mass(), 0.2);
  EXPECT_EQ(physical.cell_size_nm(), 0.25);
  EXPECT_EQ(physical.energy_label(), "meV");
  const double expected = 1e3 * codata::hbar2_over_2me_ev_nm2 / 0.2;
  EXPECT_NEAR(physical.solver_energy_unit(), expected, relative_rounding * expected);
  EXPECT_NE(physical.description().find("0.25 nm"), std::string::npos) << physical.description();

  // Defaults: m* = 0.067, eV.
  const UnitSystem defaults = parse("set system = physical");
  EXPECT_EQ(defaults.effective_mass(), 0.067);
  EXPECT_EQ(defaults.energy_label(), "eV");
}


TEST(Units, InvalidInputIsRejected)
{
  EXPECT_ANY_THROW(parse("set system = imperial"));
  EXPECT_ANY_THROW(parse("set energy unit = Ry"));
  EXPECT_ANY_THROW(parse("set effective mass = 0"));
  const std::string mass = input_error_message(
    [] { UnitSystem::physical(0.0, 1.0, UnitSystem::EnergyUnit::electronvolt); });
  EXPECT_NE(mass.find("units/effective mass"), std::string::npos) << mass;
  EXPECT_NE(mass.find("[0.001, 1000]"), std::string::npos) << mass;
  const std::string size = input_error_message(
    [] { UnitSystem::physical(1.0, -1.0, UnitSystem::EnergyUnit::electronvolt); });
  EXPECT_NE(size.find("lattice/cell size"), std::string::npos) << size;
}
