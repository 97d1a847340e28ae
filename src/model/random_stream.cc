/** @file random_stream.cc  Philox-4x32-10 and its use as a keyed uniform stream. */
#include <alloyspec/model/random_stream.h>

#include <stdexcept>
#include <string>

namespace alloyspec
{
  namespace
  {
    // Constants of Philox-4x32 from Salmon et al. (SC11), Table 2 and Sec. 4.
    constexpr std::uint32_t philox_m0 = 0xD2511F53u; // multiplier for counter word 0
    constexpr std::uint32_t philox_m1 = 0xCD9E8D57u; // multiplier for counter word 2
    constexpr std::uint32_t weyl_w0   = 0x9E3779B9u; // golden ratio, key word 0 increment
    constexpr std::uint32_t weyl_w1   = 0xBB67AE85u; // sqrt(3) - 1, key word 1 increment
    constexpr unsigned int  philox_rounds = 10;

    /** One Philox S-box round: two 32x32->64 products, then a word permutation. */
    inline std::array<std::uint32_t, 4> philox_round(const std::array<std::uint32_t, 4> &x,
                                                     const std::array<std::uint32_t, 2> &k)
    {
      const std::uint64_t p0 = std::uint64_t(philox_m0) * x[0];
      const std::uint64_t p1 = std::uint64_t(philox_m1) * x[2];
      const auto          hi0 = static_cast<std::uint32_t>(p0 >> 32);
      const auto          lo0 = static_cast<std::uint32_t>(p0);
      const auto          hi1 = static_cast<std::uint32_t>(p1 >> 32);
      const auto          lo1 = static_cast<std::uint32_t>(p1);
      return {{hi1 ^ x[1] ^ k[0], lo1, hi0 ^ x[3] ^ k[1], lo0}};
    }
  } // namespace


  std::array<std::uint32_t, 4> philox4x32_10(const std::array<std::uint32_t, 4> &counter,
                                             const std::array<std::uint32_t, 2> &key)
  {
    std::array<std::uint32_t, 4> x = counter;
    std::array<std::uint32_t, 2> k = key;
    for (unsigned int round = 0; round < philox_rounds; ++round)
      {
        // The key schedule is bumped between rounds, not before the first one.
        if (round > 0)
          {
            k[0] += weyl_w0; // unsigned: wraps modulo 2^32 as the cipher requires
            k[1] += weyl_w1;
          }
        x = philox_round(x, k);
      }
    return x;
  }


  double words_to_open01(const std::uint32_t high, const std::uint32_t low)
  {
    // Why 52 bits and not 53: (k + 1/2) 2^-53 with k < 2^53 is not
    // representable for k >= 2^52 (doubles in [1/2, 1) are spaced 2^-53), and
    // the top value would round up to exactly 1. With k < 2^52 the product
    // (2k + 1) 2^-53 has a 53-bit odd numerator and is exact, so the result
    // lies in [2^-53, 1 - 2^-53].
    const std::uint64_t bits = (std::uint64_t(high) << 32) | low;
    const std::uint64_t k    = bits >> 12;
    constexpr double    two_to_minus_52 = 1.0 / 4503599627370496.0; // 2^-52, exact
    return (static_cast<double>(k) + 0.5) * two_to_minus_52;
  }


  double uniform_open01(const std::uint64_t seed, const std::uint64_t realisation,
                        const std::uint64_t cell, const std::uint32_t draw)
  {
    // Mapping (documented here because results depend on it):
    //   key     = {seed bits 0-31, seed bits 32-63}
    //   counter = {cell, draw, realisation bits 0-31, realisation bits 32-63}
    // For a fixed seed the map (realisation, cell, draw) -> counter is
    // injective on realisation < 2^64, cell < 2^32, draw < 2^32, and Philox is
    // a bijection of the counter, so distinct triples never share a block.
    // Cells beyond 2^32 would alias, hence the check (Lattice allows 2^31).
    if (cell > 0xFFFFFFFFull)
      throw std::out_of_range("uniform_open01: cell index " + std::to_string(cell) +
                              " does not fit into 32 bits");
    const std::array<std::uint32_t, 4> counter{{static_cast<std::uint32_t>(cell),
                                                draw,
                                                static_cast<std::uint32_t>(realisation),
                                                static_cast<std::uint32_t>(realisation >> 32)}};
    const std::array<std::uint32_t, 2> key{
      {static_cast<std::uint32_t>(seed), static_cast<std::uint32_t>(seed >> 32)}};
    const std::array<std::uint32_t, 4> out = philox4x32_10(counter, key);
    // Words 0 and 1 of the output block; words 2 and 3 are left unused.
    return words_to_open01(out[0], out[1]);
  }
} // namespace alloyspec
