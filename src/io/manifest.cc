#include <alloyspec/io/manifest.h>
#include <alloyspec/io/results_store.h>

#include <cmath>

#include <unistd.h>

namespace alloyspec
{
  std::string json_text(const Json &value)
  {
    return value.dump(2, ' ', false, Json::error_handler_t::replace) + "\n";
  }

  Json json_number(const double x)
  {
    return std::isfinite(x) ? Json(x) : Json(nullptr);
  }

  Json manifest_header(const std::string &command)
  {
    char host[256] = "unknown";
    gethostname(host, sizeof host - 1);
    Json header;
    header["program"] = "alloyspec";
    header["command"] = command;
    header["version"] = ALLOYSPEC_VERSION;
    header["host"]    = std::string(host);
    header["note"]    = "Model estimates for the stated model and box; not measurements.";
    return header;
  }

  void write_json_file(const std::string &directory, const std::string &file, const Json &value)
  {
    ResultsStore::write_file_in(directory, file, json_text(value));
  }
} // namespace alloyspec
