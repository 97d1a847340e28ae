// Unit tests of the counter-based random stream: the Philox-4x32-10 cipher
// against published known answers, the conversion to (0, 1), the key mapping,
// and the uniformity of the resulting numbers.
#include <alloyspec/model/random_stream.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <iostream>
#include <iterator>
#include <set>
#include <stdexcept>
#include <vector>

namespace
{
  using alloyspec::philox4x32_10;
  using alloyspec::uniform_open01;
  using alloyspec::words_to_open01;

  using Block = std::array<std::uint32_t, 4>;
  using Key   = std::array<std::uint32_t, 2>;

  constexpr std::size_t n_uniformity_draws = 100000;
  /**
   * Critical value of sqrt(n) D_n at significance 0.1%: the asymptotic
   * Kolmogorov distribution gives P(sqrt(n) D_n > K) ≈ 2 exp(-2 K^2), and
   * sqrt(ln(2 / 0.001) / 2) = 1.949 (Kolmogorov 1933; Smirnov 1948 table).
   * With n = 1e5 the asymptotic form is accurate to far better than the
   * difference between 1.95 and 1.949.
   */
  constexpr double ks_critical_sqrt_n = 1.95;
  /**
   * Sample correlation of n independent pairs has standard deviation about
   * 1/sqrt(n) (central limit theorem); 4 standard deviations is common
   * practice for a deterministic test (no single source).
   */
  constexpr double correlation_standard_errors = 4.0;

  /** Kolmogorov–Smirnov statistic D_n of @p u against the uniform law on (0, 1). */
  double ks_statistic(std::vector<double> u)
  {
    std::sort(u.begin(), u.end());
    const double n = static_cast<double>(u.size());
    double       d = 0;
    for (std::size_t i = 0; i < u.size(); ++i)
      d = std::max({d, (i + 1) / n - u[i], u[i] - i / n});
    return d;
  }

  double ks_critical_value(const std::size_t n)
  {
    return ks_critical_sqrt_n / std::sqrt(static_cast<double>(n));
  }
} // namespace


TEST(Philox4x32_10, MatchesRandom123KnownAnswers)
{
  // Known-answer vectors "philox4x32 10" of the Random123 distribution file
  // tests/kat_vectors (D. E. Shaw Research), as copied verbatim into
  // DEShawResearch/Random123-Boost, libs/random/test/test_philox.cpp
  // (commit 916db91a), test case test_kat_philox4x32. Row format:
  // counter[4] key[2] -> output[4].
  struct Kat
  {
    Block counter;
    Key   key;
    Block expected;
  };
  const Kat kats[] = {
    {{{0x00000000, 0x00000000, 0x00000000, 0x00000000}},
     {{0x00000000, 0x00000000}},
     {{0x6627e8d5, 0xe169c58d, 0xbc57ac4c, 0x9b00dbd8}}},
    {{{0xffffffff, 0xffffffff, 0xffffffff, 0xffffffff}},
     {{0xffffffff, 0xffffffff}},
     {{0x408f276d, 0x41c83b0e, 0xa20bc7c6, 0x6d5451fd}}},
    {{{0x243f6a88, 0x85a308d3, 0x13198a2e, 0x03707344}},
     {{0xa4093822, 0x299f31d0}},
     {{0xd16cfe09, 0x94fdcceb, 0x5001e420, 0x24126ea1}}},
  };
  for (const Kat &kat : kats)
    {
      const Block out = philox4x32_10(kat.counter, kat.key);
      for (unsigned int i = 0; i < 4; ++i)
        EXPECT_EQ(out[i], kat.expected[i]) << "word " << i << " of KAT with counter[0] = 0x"
                                           << std::hex << kat.counter[0];
    }
}


TEST(WordsToOpen01, StaysStrictlyInsideTheUnitInterval)
{
  const double smallest = words_to_open01(0, 0);
  const double largest  = words_to_open01(0xffffffffu, 0xffffffffu);
  EXPECT_GT(smallest, 0.0);
  EXPECT_LT(largest, 1.0);
  // The extreme grid points (2k + 1) 2^-53 for k = 0 and k = 2^52 - 1.
  EXPECT_EQ(smallest, std::ldexp(1.0, -53));
  EXPECT_EQ(largest, 1.0 - std::ldexp(1.0, -53));
  // The low 12 bits are discarded.
  EXPECT_EQ(words_to_open01(0, 0xfffu), smallest);
  EXPECT_GT(words_to_open01(0, 0x1000u), smallest);
}


TEST(WordsToOpen01, ComplementingTheBitsGivesOneMinusU)
{
  // Exact symmetry u -> 1 - u: both sides are exactly representable.
  const std::uint32_t samples[][2] = {
    {0, 0}, {0x12345678u, 0x9abcdef0u}, {0x80000000u, 0}, {0x7fffffffu, 0xffffffffu}};
  for (const auto &w : samples)
    EXPECT_EQ(words_to_open01(~w[0], ~w[1]), 1.0 - words_to_open01(w[0], w[1]));
}


TEST(UniformOpen01, UsesTheDocumentedKeyAndCounterMapping)
{
  // key = {seed lo, seed hi}; counter = {cell, draw, realisation lo, realisation hi};
  // output words 0 and 1 give the double. Pinning this keeps old studies reproducible.
  const std::uint64_t seed        = 0x0123456789abcdefull;
  const std::uint64_t realisation = 0x0000000500000007ull;
  const std::uint64_t cell        = 1234567;
  const std::uint32_t draw        = 3;
  const Block out = philox4x32_10({{1234567u, 3u, 7u, 5u}}, {{0x89abcdefu, 0x01234567u}});
  EXPECT_EQ(uniform_open01(seed, realisation, cell, draw), words_to_open01(out[0], out[1]));
}


TEST(UniformOpen01, IsDeterministic)
{
  for (std::uint64_t n = 0; n < 100; ++n)
    EXPECT_EQ(uniform_open01(42, 3, n, 1), uniform_open01(42, 3, n, 1));
}


TEST(UniformOpen01, DistinctKeysGiveDistinctNumbers)
{
  // Triples chosen where a careless packing of (realisation, cell, draw)
  // into 128 bits would make them coincide. A chance coincidence of two
  // 52-bit values has probability ~1e-14 here.
  const std::uint64_t big = std::uint64_t(1) << 32;
  struct Triple
  {
    std::uint64_t r, c;
    std::uint32_t d;
  };
  const Triple triples[] = {{0, 0, 0},       {1, 0, 0},        {0, 1, 0},
                            {0, 0, 1},       {big, 0, 0},      {big + 1, 0, 0},
                            {0, big - 1, 0}, {0, 0, 0xffffffffu}, {1, 1, 1},
                            {big - 1, 0, 0}, {0, big - 1, 0xffffffffu}};
  std::set<double> seen;
  for (const Triple &t : triples)
    seen.insert(uniform_open01(7, t.r, t.c, t.d));
  EXPECT_EQ(seen.size(), std::size(triples));

  // Seeds differing in either 32-bit half change the numbers as well.
  EXPECT_NE(uniform_open01(1, 0, 0), uniform_open01(2, 0, 0));
  EXPECT_NE(uniform_open01(1, 0, 0), uniform_open01(1 + big, 0, 0));
}


TEST(UniformOpen01, RejectsCellIndicesBeyond32Bits)
{
  EXPECT_NO_THROW(uniform_open01(1, 0, 0xffffffffull));
  EXPECT_THROW(uniform_open01(1, 0, std::uint64_t(1) << 32), std::out_of_range);
}


TEST(UniformOpen01, KolmogorovSmirnovAlongCellsRealisationsAndDraws)
{
  std::vector<double> along_cells, along_realisations, along_draws;
  for (std::size_t i = 0; i < n_uniformity_draws; ++i)
    {
      along_cells.push_back(uniform_open01(2024, 0, i));
      along_realisations.push_back(uniform_open01(2024, i, 17));
      along_draws.push_back(uniform_open01(2024, 5, 17, static_cast<std::uint32_t>(i)));
    }
  const double critical = ks_critical_value(n_uniformity_draws);
  const double d_cells  = ks_statistic(along_cells);
  const double d_real   = ks_statistic(along_realisations);
  const double d_draws  = ks_statistic(along_draws);
  EXPECT_LT(d_cells, critical) << "D_n along cells";
  EXPECT_LT(d_real, critical) << "D_n along realisations";
  EXPECT_LT(d_draws, critical) << "D_n along draws";
  std::cout << "KS D_n (critical " << critical << "): cells " << d_cells << ", realisations "
            << d_real << ", draws " << d_draws << std::endl;
}


TEST(UniformOpen01, DrawsOfOneCellAreUncorrelated)
{
  // Laws needing two uniforms per cell rely on draws 0 and 1 being independent.
  double sx = 0, sy = 0, sxx = 0, syy = 0, sxy = 0;
  for (std::size_t c = 0; c < n_uniformity_draws; ++c)
    {
      const double x = uniform_open01(99, 1, c, 0);
      const double y = uniform_open01(99, 1, c, 1);
      sx += x;
      sy += y;
      sxx += x * x;
      syy += y * y;
      sxy += x * y;
    }
  const double n   = static_cast<double>(n_uniformity_draws);
  const double cov = sxy / n - (sx / n) * (sy / n);
  const double r   = cov / std::sqrt((sxx / n - sx * sx / (n * n)) * (syy / n - sy * sy / (n * n)));
  EXPECT_LT(std::abs(r), correlation_standard_errors / std::sqrt(n)) << "r = " << r;
}
