/** @file report.cc  Base64 and the self-contained HTML report. */
#include <alloyspec/analysis/report.h>

#include <fstream>
#include <iterator>
#include <sstream>

namespace alloyspec
{
  std::string base64_encode(const std::string &bytes)
  {
    static constexpr char alphabet[] =
      "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    std::string out;
    out.reserve(4 * ((bytes.size() + 2) / 3));
    std::size_t i = 0;
    // Each group of 3 bytes (24 bits) becomes 4 characters of 6 bits.
    for (; i + 3 <= bytes.size(); i += 3)
      {
        const unsigned long v = (static_cast<unsigned char>(bytes[i]) << 16) |
                                (static_cast<unsigned char>(bytes[i + 1]) << 8) |
                                static_cast<unsigned char>(bytes[i + 2]);
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += alphabet[(v >> 6) & 63];
        out += alphabet[v & 63];
      }
    // A final group of 1 or 2 bytes is padded with '=' to 4 characters.
    const std::size_t rest = bytes.size() - i;
    if (rest > 0)
      {
        unsigned long v = static_cast<unsigned long>(static_cast<unsigned char>(bytes[i])) << 16;
        if (rest == 2)
          v |= static_cast<unsigned long>(static_cast<unsigned char>(bytes[i + 1])) << 8;
        out += alphabet[(v >> 18) & 63];
        out += alphabet[(v >> 12) & 63];
        out += rest == 2 ? alphabet[(v >> 6) & 63] : '=';
        out += '=';
      }
    return out;
  }

  std::string html_escape(const std::string &text)
  {
    std::string out;
    for (const char c : text)
      switch (c)
        {
          case '&':
            out += "&amp;";
            break;
          case '<':
            out += "&lt;";
            break;
          case '>':
            out += "&gt;";
            break;
          case '"':
            out += "&quot;";
            break;
          case '\'':
            out += "&#39;";
            break;
          default:
            out += c;
        }
    return out;
  }

  namespace
  {
    std::string read_binary(const std::string &path)
    {
      std::ifstream in(path, std::ios::binary);
      return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
    }

    bool ends_with(const std::string &s, const std::string &tail)
    {
      return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
    }

    void render_table(std::ostringstream &html, const ReportTable &table)
    {
      html << "<table>\n";
      if (!table.caption.empty())
        html << "<caption>" << html_escape(table.caption) << "</caption>\n";
      html << "<tr>";
      for (const auto &h : table.header)
        html << "<th>" << html_escape(h) << "</th>";
      html << "</tr>\n";
      for (const auto &row : table.rows)
        {
          html << "<tr>";
          for (const auto &cell : row)
            html << "<td>" << html_escape(cell) << "</td>";
          html << "</tr>\n";
        }
      html << "</table>\n";
    }
  } // namespace

  std::string render_report(const ReportContent &content)
  {
    std::ostringstream html;
    html << "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>"
         << html_escape(content.title) << "</title>\n<style>\n"
         << "body{font-family:sans-serif;max-width:1000px;margin:2em auto;padding:0 1em;"
            "line-height:1.45;color:#222}\n"
            "table{border-collapse:collapse;margin:1em 0}\n"
            "td,th{border:1px solid #bbb;padding:.25em .6em;text-align:left;font-size:.92em}\n"
            "caption{text-align:left;font-weight:bold;padding:.3em 0}\n"
            "pre{background:#f4f4f4;padding:.8em;overflow-x:auto;font-size:.85em}\n"
            "figure{margin:1.5em 0}img{max-width:100%;border:1px solid #ddd}\n"
            ".pass{color:#1a7f37;font-weight:bold}.fail{color:#b42318;font-weight:bold}\n"
            ".caution{border-left:4px solid #c77700;background:#fff7e6;padding:.6em 1em}\n"
         << "</style>\n</head>\n<body>\n<h1>" << html_escape(content.title) << "</h1>\n";

    html << "<p class=\"caution\"><strong>Caution.</strong> The numbers and figures below are "
            "model estimates for the stated model (the Hamiltonian, the single-site law and the "
            "box given here), computed from a finite number of realisations on finite boxes. "
            "They are not measurements. Decisions about devices or materials rest on "
            "measurement and on the established practices of the user's field.</p>\n";
    if (!content.model_summary.empty())
      html << "<h2>Model</h2>\n<p>" << html_escape(content.model_summary) << "</p>\n";

    if (!content.key_numbers.empty())
      {
        ReportTable key{"", {"quantity", "value"}, {}}; // the heading names it
        for (const auto &[name, value] : content.key_numbers)
          key.rows.push_back({name, value});
        html << "<h2>Key numbers</h2>\n";
        render_table(html, key);
      }
    for (const auto &t : content.tables)
      render_table(html, t);

    if (!content.checks.empty())
      {
        html << "<h2>Checks</h2>\n<table>\n<tr><th>check</th><th>outcome</th><th>detail</th></tr>\n";
        for (const auto &c : content.checks)
          html << "<tr><td>" << html_escape(c.name) << "</td><td class=\""
               << (c.passed ? "pass\">passed" : "fail\">not passed") << "</td><td>"
               << html_escape(c.detail) << "</td></tr>\n";
        html << "</table>\n";
      }

    std::vector<std::string> omitted;
    for (const auto &f : content.figures)
      if (f.empty)
        omitted.push_back(f.title);
    if (omitted.size() < content.figures.size())
      html << "<h2>Figures</h2>\n";
    for (const auto &f : content.figures)
      {
        if (f.empty) // no data: listed below, never drawn as an empty frame
          continue;
        std::string image, type;
        for (const auto &file : f.files)
          if (ends_with(file, ".png"))
            image = file, type = "image/png";
        if (image.empty())
          for (const auto &file : f.files)
            if (ends_with(file, ".svg"))
              image = file, type = "image/svg+xml";
        html << "<figure>\n<h3>" << html_escape(f.title) << "</h3>\n";
        const std::string bytes = image.empty() ? std::string() : read_binary(image);
        if (!bytes.empty())
          html << "<img alt=\"" << html_escape(f.title) << "\" src=\"data:" << type << ";base64,"
               << base64_encode(bytes) << "\">\n";
        else
          html << "<p><em>Image not written (gnuplot missing or failed: see the notes and "
                  "figures/gnuplot.log); data and script: figures/"
               << html_escape(f.name) << ".dat, .gp</em></p>\n";
        html << "<figcaption>" << html_escape(f.caption) << "</figcaption>\n</figure>\n";
      }

    if (!content.notes.empty() || !omitted.empty())
      {
        html << "<h2>Notes</h2>\n<ul>\n";
        for (const auto &n : content.notes)
          html << "<li>" << html_escape(n) << "</li>\n";
        for (const auto &t : omitted)
          html << "<li>Figure omitted, nothing to draw: " << html_escape(t)
               << " (fewer than two points with a value; see the tables).</li>\n";
        html << "</ul>\n";
      }
    if (!content.parameters_text.empty())
      html << "<h2>Parameters</h2>\n<pre>" << html_escape(content.parameters_text) << "</pre>\n";
    html << "</body>\n</html>\n";
    return html.str();
  }
} // namespace alloyspec
