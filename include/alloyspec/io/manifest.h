/**
 * @file manifest.h  JSON files written into an output folder (run.json,
 * tails.json, landscape.json, key_numbers.json), through one library.
 */
#pragma once

#include <nlohmann/json.hpp>

#include <string>

namespace alloyspec
{
  /** A JSON value that keeps the insertion order of its keys (files read top-down). */
  using Json = nlohmann::ordered_json;

  /**
   * @p value as text, indented by two spaces. Non-finite numbers become `null`
   * (the JSON missing value); bytes that are not valid UTF-8 (a file name in a
   * legacy encoding) are replaced by U+FFFD, so the file is always valid JSON.
   */
  std::string json_text(const Json &value);

  /** A number, or null when it is not finite. */
  Json json_number(double x);

  /**
   * The fields every manifest starts with: program, command, version, host,
   * and the caution that these are model estimates.
   */
  Json manifest_header(const std::string &command);

  /** Writes json_text(@p value) to @p directory/@p file atomically (temporary file, then rename). */
  void write_json_file(const std::string &directory, const std::string &file, const Json &value);
} // namespace alloyspec
