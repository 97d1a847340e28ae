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
   * A double uniform in the open interval (0, 1), with 53 random bits, for the
   * given key. The key is (seed → Philox key; realisation, cell, draw →
   * counter). @p draw selects independent numbers for the same cell (laws that
   * need more than one uniform per cell).
   */
  double uniform_open01(std::uint64_t seed, std::uint64_t realisation, std::uint64_t cell,
                        std::uint32_t draw = 0);
} // namespace alloyspec
