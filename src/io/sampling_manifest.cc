#include <alloyspec/io/sampling_manifest.h>
#include <alloyspec/model/effective_sample_size.h>

#include <algorithm>
#include <cmath>

namespace alloyspec
{
  Json sampling_manifest(const SamplingSettings &sampling, const std::string &pilot,
                         const std::vector<std::pair<std::string, std::vector<double>>> &log_weights)
  {
    const bool tilted   = sampling.is_tilted();
    const bool windowed = tilted && sampling.tilt_window > 0;
    Json block = {
      {"method", sampling.method_name()},
      {"tilt", json_number(tilted ? sampling.tilt : 0.0)},
      {"tilt_choice", tilted ? (sampling.automatic ? "auto" : "given") : "none"},
      {"target_energy", sampling.target_energy ? json_number(*sampling.target_energy) : Json()},
      {"tilt_window", windowed ? Json(sampling.tilt_window) : Json("box")},
      {"tilt_window_choice", windowed ? Json(sampling.tilt_window_automatic ?
                                               "auto (from the target energy)" : "given")
                                      : Json()},
      {"tilt_shape", tilted ? Json(tilt_shape_name(sampling.tilt_shape)) : Json()},
      {"untilted_share", windowed ? json_number(sampling.untilted_share) : Json()},
      {"pilot", pilot}};
    Json ess = Json::object();
    for (const auto &[boundary, logs] : log_weights)
      {
        if (logs.empty())
          continue;
        ess[boundary] = {{"realisations", logs.size()},
                         {"effective_sample_size", json_number(effective_sample_size_of_logs(logs))}};
      }
    block["weights"] = ess;
    return block;
  }
} // namespace alloyspec
