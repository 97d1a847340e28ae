/**
 * @file report.h  A self-contained HTML report: parameters, key numbers,
 * figures embedded as base64 data URIs, the checks made, and a caution on how
 * to read model estimates.
 */
#pragma once

#include <alloyspec/analysis/figures.h>

#include <string>
#include <utility>
#include <vector>

namespace alloyspec
{
  /** Base64 encoding with padding, standard alphabet (RFC 4648, section 4). */
  std::string base64_encode(const std::string &bytes);

  /** Escapes &, <, >, " and ' for HTML text and attributes. */
  std::string html_escape(const std::string &text);

  /** A table of the report; cells are plain text (escaped when rendered). */
  struct ReportTable
  {
    std::string                           caption;
    std::vector<std::string>              header;
    std::vector<std::vector<std::string>> rows;
  };

  /** One consistency check and its outcome. */
  struct ReportCheck
  {
    std::string name;
    bool        passed = false;
    std::string detail;
  };

  /** Everything the report shows. */
  struct ReportContent
  {
    std::string                                      title;
    std::string                                      model_summary; ///< model and box, one paragraph
    std::string                                      parameters_text;
    std::vector<std::pair<std::string, std::string>> key_numbers;
    std::vector<ReportTable>                         tables;
    std::vector<Figure>                              figures;
    std::vector<ReportCheck>                         checks;
    std::vector<std::string>                         notes; ///< warnings and caveats
  };

  /**
   * Renders the report as one HTML document with no external references:
   * PNG figures (else SVG) are read from disk and embedded as data URIs; a
   * figure without an image is listed with its caption and a note.
   */
  std::string render_report(const ReportContent &content);
} // namespace alloyspec
