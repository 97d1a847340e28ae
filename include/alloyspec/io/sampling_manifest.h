/** @file sampling_manifest.h  run.json's `sampling` block, shared by `run` and `count`. */
#pragma once

#include <alloyspec/io/manifest.h>
#include <alloyspec/model/sampling.h>

#include <string>
#include <utility>
#include <vector>

namespace alloyspec
{
  /**
   * The `sampling` block of run.json: the method, the tilt θ and how it was
   * chosen (given, automatic, none), the target energy, the tilt window and
   * shape, the pilot's log (@p pilot, empty when there was none) and, per
   * boundary condition, the number of realisations and Kong's effective
   * sample size of their weights @f$(\sum_r w_r)^2/\sum_r w_r^2@f$ (Kong 1992).
   * The weights are scaled by @f$e^{-\max_r \ln w_r}@f$ first: the ratio is
   * unchanged and nothing overflows. @p log_weights: (boundary name, the
   * realisations' ln w) pairs; a boundary condition without realisations is
   * left out.
   */
  Json sampling_manifest(const SamplingSettings &sampling, const std::string &pilot,
                         const std::vector<std::pair<std::string, std::vector<double>>> &log_weights);
} // namespace alloyspec
