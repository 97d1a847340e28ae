// Tests of base64, the HTML report, the gnuplot driver and the whole analysis
// on invented spectra (free-box levels shifted by an invented random amount
// per realisation; not the output of any solve).
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/analysis/figures.h>
#include <alloyspec/analysis/report.h>
#include <alloyspec/analysis/size_series.h>
#include <alloyspec/analysis/spectrum_statistics.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>

namespace
{
  using namespace alloyspec;

  constexpr double kPi = 3.14159265358979323846;

  std::string slurp(const std::string &path)
  {
    std::ifstream in(path, std::ios::binary);
    return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
  }

  std::string first_line(const std::string &path)
  {
    std::ifstream in(path);
    std::string   line;
    std::getline(in, line);
    return line;
  }

  /** A fresh empty folder under the system's temporary directory. */
  std::string scratch(const std::string &name)
  {
    const auto dir = std::filesystem::temp_directory_path() / ("alloyspec_" + name);
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
    return dir.string();
  }

  /**
   * Invented study on an L³ box: free Dirichlet / Neumann levels
   * π²(n1²+n2²+n3²)/L² plus a shift s_r uniform in [0, 1] per realisation
   * (E0 = 0, mean potential 0.5). Dirichlet levels are complete up to 40,
   * Neumann up to 35, to exercise the incomplete flags.
   */
  AnalysisInput invented_study(unsigned int l, std::size_t realisations)
  {
    AnalysisInput in;
    in.dimension      = 3;
    in.cells          = {l, l, l};
    in.cell_size      = 1.0;
    in.volume         = double(l) * l * l;
    in.boundaries     = {"dirichlet", "neumann"};
    in.band_bottom    = 0.0;
    in.mean_potential = 0.5;
    in.model_summary  = "Invented test data: free box levels shifted per realisation.";
    in.parameters_text = "subsection lattice\n  set cells = " + std::to_string(l) + "\nend\n";
    for (int i = 0; i <= 60; ++i)
      in.energies.push_back(0.5 * i);
    SplitMix64 rng(l);
    for (std::size_t r = 0; r < realisations; ++r)
      {
        const double shift = rng.uniform();
        for (const std::string bc : {"dirichlet", "neumann"})
          {
            RealisationRecord rec;
            rec.realisation    = r;
            rec.boundary       = bc;
            rec.complete_up_to = bc == "dirichlet" ? 40.0 : 35.0;
            const int first    = bc == "dirichlet" ? 1 : 0;
            for (int a = first; a < 20; ++a)
              for (int b = first; b < 20; ++b)
                for (int c = first; c < 20; ++c)
                  {
                    const double e = kPi * kPi * (a * a + b * b + c * c) / (l * l) + shift;
                    if (e <= rec.complete_up_to + 5.0)
                      rec.eigenvalues.push_back(e);
                  }
            std::sort(rec.eigenvalues.begin(), rec.eigenvalues.end());
            for (std::size_t j = 0; j < rec.eigenvalues.size(); ++j)
              rec.inverse_participation_ratios.push_back((1.0 + 0.2 * rng.uniform()) / in.volume);
            in.records.push_back(rec);
          }
      }
    return in;
  }
} // namespace

TEST(Base64, Rfc4648TestVectors)
{
  // RFC 4648, section 10.
  EXPECT_EQ(base64_encode(""), "");
  EXPECT_EQ(base64_encode("f"), "Zg==");
  EXPECT_EQ(base64_encode("fo"), "Zm8=");
  EXPECT_EQ(base64_encode("foo"), "Zm9v");
  EXPECT_EQ(base64_encode("foob"), "Zm9vYg==");
  EXPECT_EQ(base64_encode("fooba"), "Zm9vYmE=");
  EXPECT_EQ(base64_encode("foobar"), "Zm9vYmFy");
  // All byte values, including those with the high bit set.
  EXPECT_EQ(base64_encode(std::string("\xff\xfe\x00", 3)), "//4A");
}

TEST(Report, EscapesTextAndStatesTheCaution)
{
  ReportContent c;
  c.title = "a <b> & 'c'";
  c.checks.push_back({"x < y", true, "fine"});
  const std::string html = render_report(c);
  EXPECT_NE(html.find("a &lt;b&gt; &amp; &#39;c&#39;"), std::string::npos);
  EXPECT_EQ(html.find("<b>"), std::string::npos);
  EXPECT_NE(html.find("not measurements"), std::string::npos);
  EXPECT_NE(html.find("class=\"pass\""), std::string::npos);
}

TEST(Figures, MissingGnuplotIsAWarningNotACrash)
{
  const std::string dir = scratch("no_gnuplot");
  FigureMaker       maker(dir, {"png"}, "E", "/nonexistent/gnuplot");
  EXPECT_FALSE(maker.available());
  const Figure f = maker.make("test", "t", "c", "1 2\n2 3\n", "plot data using 1:2\n");
  EXPECT_FALSE(f.empty);
  EXPECT_TRUE(f.files.empty());
  ASSERT_FALSE(maker.warnings().empty());
  EXPECT_NE(maker.warnings()[0].find("gnuplot not found"), std::string::npos);
  EXPECT_TRUE(std::filesystem::exists(dir + "/test.gp"));
  EXPECT_EQ(gnuplot_string("it's"), "'it''s'");
  // One point, or none with a value, is nothing to draw: the figure is omitted.
  EXPECT_TRUE(maker.make("lonely", "t", "c", "1 2\n", "plot data using 1:2\n").empty);
  EXPECT_TRUE(maker.make("blank", "t", "c", "1 nan\n2 nan\n", "plot data using 1:2\n").empty);
}

TEST(Figures, ReadsCsvColumnsByName)
{
  const std::string dir = scratch("csv");
  std::ofstream(dir + "/t.csv") << "energy,ids_dirichlet,complete_dirichlet\n0,1.5,1\n1,,0\n";
  const Columns t = read_csv_columns(dir + "/t.csv");
  ASSERT_EQ(t.at("energy").size(), 2u);
  EXPECT_EQ(t.at("ids_dirichlet")[0], 1.5);
  EXPECT_TRUE(std::isnan(t.at("ids_dirichlet")[1]));
  std::ofstream(dir + "/bad.csv") << "a,b\n1\n";
  EXPECT_THROW(read_csv_columns(dir + "/bad.csv"), InputError);
}

TEST(Analysis, WritesTablesFiguresAndSelfContainedReport)
{
  const std::string dir = scratch("analysis");
  AnalysisSettings  s;
  s.bootstrap_samples = 200;
  s.lorentzian_width  = 0.3;
  s.gaussian_width    = 0.3;
  s.bin_width         = 2.0;
  // An ids.csv as the study writes it, read by column name (semiclassical for
  // q uniform on [0, 1]: E_q[(E − q)₊^{3/2}]/(6π²) = (2/5)(E^{5/2} − (E − 1)₊^{5/2})/(6π²)).
  const AnalysisInput in = invented_study(6, 12);
  {
    IdsAccumulator d(in.energies, in.volume), n(in.energies, in.volume);
    for (const auto &r : in.records)
      (r.boundary == "dirichlet" ? d : n).add(r.eigenvalues, r.complete_up_to);
    const auto          rd = d.rows(), rn = n.rows();
    std::ofstream       csv(dir + "/ids.csv");
    csv << "energy,ids_dirichlet,stderr_dirichlet,ids_neumann,stderr_neumann,width,"
           "complete_dirichlet,complete_neumann,semiclassical,realisations\n";
    for (std::size_t i = 0; i < in.energies.size(); ++i)
      {
        const double e    = in.energies[i];
        const double semi = 0.4 * (std::pow(e, 2.5) - std::pow(std::max(0.0, e - 1), 2.5)) /
                            (6 * kPi * kPi);
        csv << e << ',' << rd[i].mean << ',' << rd[i].standard_error << ',' << rn[i].mean << ','
            << rn[i].standard_error << ',' << rn[i].mean - rd[i].mean << ','
            << rd[i].complete << ',' << rn[i].complete << ',' << semi << ",12\n";
      }
  }
  const auto warnings = write_analysis(dir, in, s);
  const bool gnuplot  = std::filesystem::exists("/usr/bin/gnuplot");
  if (gnuplot)
    {
      // The only warning allowed is the one line on spectra too short for the
      // Lorentzian's 30η margin above the grid (η = 0.3 here).
      for (const auto &w : warnings)
        EXPECT_NE(w.find("eigenvalues (spectrum/eigenvalues) would cover it"), std::string::npos)
          << w;
      EXPECT_LE(warnings.size(), 1u);
    }

  EXPECT_EQ(first_line(dir + "/dos.csv"),
            "energy,lorentzian_dirichlet,lorentzian_stderr_dirichlet,lorentzian_complete_dirichlet,"
            "gaussian_dirichlet,gaussian_stderr_dirichlet,gaussian_complete_dirichlet,"
            "lorentzian_neumann,lorentzian_stderr_neumann,lorentzian_complete_neumann,"
            "gaussian_neumann,gaussian_stderr_neumann,gaussian_complete_neumann");
  EXPECT_EQ(first_line(dir + "/localisation.csv").substr(0, 40),
            "bin_low,bin_high,ratio_dirichlet,ratio_s");
  const std::string tails = slurp(dir + "/tails.json");
  EXPECT_NE(tails.find("\"lifshitz\""), std::string::npos);
  EXPECT_NE(tails.find("\"urbach\""), std::string::npos);
  // Shifted free-box levels of a 6³ box leave only 2 usable Neumann grid
  // points in the automatic Lifshitz window: that fit must say it is not resolved.
  EXPECT_NE(tails.find("\"resolved\": false"), std::string::npos);

  // Legends name the boundary conditions with capitals, as the names of people.
  const std::string ids_script = slurp(dir + "/figures/ids.gp");
  for (const char *legend : {"title 'Dirichlet'", "title 'Neumann'", "title 'Dirichlet band'"})
    EXPECT_NE(ids_script.find(legend), std::string::npos) << legend;
  EXPECT_EQ(ids_script.find("title 'dirichlet"), std::string::npos);
  EXPECT_EQ(slurp(dir + "/figures/dos.gp").find("title 'neumann"), std::string::npos);

  const std::string html = slurp(dir + "/report.html");
  EXPECT_NE(html.find("Dirichlet–Neumann bracketing per realisation"), std::string::npos);
  EXPECT_EQ(html.find("class=\"fail\""), std::string::npos);
  EXPECT_EQ(html.find("src=\"http"), std::string::npos); // nothing outside the file
  if (gnuplot)
    {
      EXPECT_NE(html.find("src=\"data:image/png;base64,"), std::string::npos);
      for (const char *name : {"ids", "dos", "lifshitz", "urbach", "ipr", "level_statistics"})
        for (const char *ext : {".png", ".svg"})
          EXPECT_TRUE(std::filesystem::exists(dir + "/figures/" + name + ext)) << name << ext;
    }
}

TEST(Analysis, SummaryExtrapolatesOverBoxSizes)
{
  const std::string dir = scratch("summary");
  AnalysisSettings  s;
  s.bootstrap_samples = 100;
  s.figure_formats    = {"png"};
  const auto warnings = write_size_series(dir, {invented_study(4, 8), invented_study(6, 8),
                                            invented_study(8, 8)},
                                      s);
  EXPECT_EQ(first_line(dir + "/extrapolation.csv"),
            "energy,n_infinity_dirichlet,stderr_dirichlet,c_dirichlet,c_stderr_dirichlet,"
            "chi_squared_dirichlet,dof_dirichlet,"
            "sizes_used_dirichlet,consistent_dirichlet,n_infinity_neumann,stderr_neumann,c_neumann,"
            "c_stderr_neumann,chi_squared_neumann,dof_neumann,sizes_used_neumann,consistent_neumann,"
            "agree");
  EXPECT_TRUE(std::filesystem::exists(dir + "/report.html"));
  EXPECT_THROW(write_size_series(dir, {invented_study(4, 3)}, s), InputError);
}
