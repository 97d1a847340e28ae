/** @file random_stream.h  Counter-based random numbers keyed by (seed, realisation, cell). */
#pragma once

#include <array>
#include <cstdint>

namespace alloyspec
{
  /**
   * Philox-4x32-10 (Salmon, Moraes, Dror, Shaw, "Parallel random numbers: as
   * easy as 1, 2, 3", SC11, 2011): a bijection of a 128-bit counter under a
   * 64-bit key. Stateless, so the value for (seed, realisation, cell, draw)
   * does not depend on which rank or thread asks, or in which order.
   */
  std::array<std::uint32_t, 4> philox4x32_10(const std::array<std::uint32_t, 4> &counter,
                                             const std::array<std::uint32_t, 2> &key);

  /**
   * Maps 64 random bits (@p high, @p low) to a double in the open interval
   * (0, 1): the top 52 bits k give @f$(k + 1/2)\,2^{-52}@f$, i.e. the 2^52
   * equally likely midpoints of a uniform grid, all exactly representable, so
   * neither 0 nor 1 can occur (the quantile functions of unbounded laws may
   * be evaluated safely) and u ↦ 1 − u maps the set of values onto itself.
   */
  double words_to_open01(std::uint32_t high, std::uint32_t low);

  /**
   * A double uniform in the open interval (0, 1), with 53 significant bits
   * (see words_to_open01()), for the given key. The key is (seed → Philox key;
   * realisation, cell, draw → counter). @p draw selects independent numbers for
   * the same cell (laws that need more than one uniform per cell). Requires
   * @p cell < 2^32 (std::out_of_range otherwise), which Lattice guarantees.
   */
  double uniform_open01(std::uint64_t seed, std::uint64_t realisation, std::uint64_t cell,
                        std::uint32_t draw = 0);
} // namespace alloyspec
