// RFC 4180 CSV reading and the `samples()` column extraction (csv.hpp says
// what is read and how it departs from the RFC).
#include "parser/csv.hpp"

#include <cerrno>
#include <charconv>
#include <cmath>
#include <fstream>
#include <sstream>

namespace ringdown {

namespace {

Diagnostic csv_error(const std::string& file, int line, int column, int length,
                     const CsvTable* table, std::string message, std::string hint = "") {
  Diagnostic d;
  d.severity = Severity::Error;
  d.where.file = file;
  d.where.line = line;
  d.where.column = column;
  d.where.length = std::max(length, 1);
  if (table && line >= 1 && line <= static_cast<int>(table->lines.size())) {
    d.where.source_line = table->lines[static_cast<std::size_t>(line - 1)];
  }
  d.message = std::move(message);
  d.hint = std::move(hint);
  return d;
}

std::vector<std::string> split_lines(std::string_view text) {
  std::vector<std::string> lines;
  std::string current;
  for (std::size_t k = 0; k < text.size(); ++k) {
    const char c = text[k];
    if (c == '\n') {
      if (!current.empty() && current.back() == '\r') current.pop_back();
      lines.push_back(std::move(current));
      current.clear();
    } else {
      current.push_back(c);
    }
  }
  if (!current.empty()) lines.push_back(std::move(current));
  return lines;
}

bool all_numeric(const std::vector<std::string>& record) {
  for (const auto& field : record) {
    if (!parse_csv_number(field)) return false;
  }
  return true;
}

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return s;
}

}  // namespace

std::optional<double> parse_csv_number(std::string_view field) {
  std::string_view s = trim(field);
  if (s.empty()) return std::nullopt;
  std::string_view body = s;
  if (body.front() == '+') body.remove_prefix(1);
  if (body.empty() || body.front() == '+') return std::nullopt;
  // Only digits, sign, point and exponent: std::from_chars would also take
  // "inf", "nan" and hexadecimal, which are not numbers a capture holds.
  for (char c : body) {
    if (!((c >= '0' && c <= '9') || c == '.' || c == 'e' || c == 'E' || c == '-' || c == '+')) {
      return std::nullopt;
    }
  }
  double value = 0;
  const auto [end, error] = std::from_chars(body.data(), body.data() + body.size(), value);
  if (error != std::errc() || end != body.data() + body.size() || !std::isfinite(value)) {
    return std::nullopt;
  }
  return value;
}

std::optional<CsvTable> parse_csv(std::string_view text, const std::string& file,
                                  Diagnostics& diagnostics, CsvHeader header) {
  CsvTable table;
  // A UTF-8 byte-order mark, as some spreadsheets write it.
  if (text.size() >= 3 && text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);
  table.lines = split_lines(text);

  std::vector<std::vector<std::string>> records;
  std::vector<int> record_lines;
  std::vector<std::vector<int>> record_columns;

  std::vector<std::string> record;
  std::vector<int> columns;
  std::string field;
  int line = 1, column = 1;          // position of the next byte
  int record_line = 1;
  int field_column = 1;
  bool in_quotes = false, was_quoted = false, after_quote = false;
  int quote_line = 0, quote_column = 0;
  bool record_has_content = false;

  const auto end_field = [&] {
    record.push_back(std::move(field));
    columns.push_back(field_column);
    field.clear();
    was_quoted = after_quote = false;
  };
  const auto end_record = [&] {
    // A blank line (no byte at all) is skipped rather than read as one empty field.
    if (record_has_content || !record.empty()) {
      end_field();
      records.push_back(std::move(record));
      record_lines.push_back(record_line);
      record_columns.push_back(std::move(columns));
    }
    record.clear();
    columns.clear();
    field.clear();
    was_quoted = after_quote = false;
    record_has_content = false;
  };

  for (std::size_t k = 0; k < text.size(); ++k) {
    const char c = text[k];
    if (!record_has_content && record.empty() && field.empty() && !in_quotes) {
      record_line = line;
    }
    if (in_quotes) {
      if (c == '"') {
        if (k + 1 < text.size() && text[k + 1] == '"') {
          field.push_back('"');  // RFC 4180 rule 7: a doubled quote is one quote
          ++k;
          column += 2;
          continue;
        }
        in_quotes = false;
        after_quote = true;
        ++column;
        continue;
      }
      field.push_back(c);
      if (c == '\n') {
        ++line;
        column = 1;
      } else {
        ++column;
      }
      continue;
    }
    if (c == ',') {
      record_has_content = true;
      end_field();
      ++column;
      field_column = column;
      continue;
    }
    if (c == '\r' && k + 1 < text.size() && text[k + 1] == '\n') {
      continue;  // the CR of CRLF; the LF ends the record
    }
    if (c == '\n') {
      end_record();
      ++line;
      column = 1;
      field_column = 1;
      continue;
    }
    if (after_quote) {
      if (c == ' ' || c == '\t') {  // spaces after a closing quote: tolerated
        ++column;
        continue;
      }
      diagnostics.push_back(csv_error(
          file, line, column, 1, &table, "text after the closing quote of a quoted field",
          "a quoted field ends at its closing quote; write a quote inside it as \"\""));
      return std::nullopt;
    }
    if (c == '"') {
      if (!trim(field).empty()) {
        diagnostics.push_back(csv_error(file, line, column, 1, &table,
                                        "a double quote inside an unquoted field",
                                        "quote the whole field and double the inner quote: "
                                        "\"a \"\"b\"\"\""));
        return std::nullopt;
      }
      field.clear();  // spaces before the opening quote are dropped
      in_quotes = was_quoted = true;
      record_has_content = true;
      quote_line = line;
      quote_column = column;
      ++column;
      continue;
    }
    field.push_back(c);
    record_has_content = true;
    ++column;
  }
  if (in_quotes) {
    diagnostics.push_back(csv_error(file, quote_line, quote_column, 1, &table,
                                    "a quoted field is not closed before the end of the file",
                                    "add the closing double quote"));
    return std::nullopt;
  }
  end_record();

  std::size_t first = 0;
  const bool has_header =
      header == CsvHeader::Present ||
      (header == CsvHeader::Detect && !records.empty() && !all_numeric(records.front()));
  if (has_header && !records.empty()) {
    table.header = std::move(records.front());
    table.header_line = record_lines.front();
    first = 1;
  }
  for (std::size_t k = first; k < records.size(); ++k) {
    table.rows.push_back(std::move(records[k]));
    table.row_lines.push_back(record_lines[k]);
    table.row_columns.push_back(std::move(record_columns[k]));
  }
  return table;
}

std::optional<CsvTable> read_csv(const std::string& path, Diagnostics& diagnostics,
                                 CsvHeader header) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    Diagnostic d;
    d.where.file = path;
    d.message = "cannot open the CSV file '" + path + "'";
    d.hint = "the path is relative to the circuit file that names it";
    diagnostics.push_back(std::move(d));
    return std::nullopt;
  }
  std::ostringstream text;
  text << in.rdbuf();
  return parse_csv(text.str(), path, diagnostics, header);
}

namespace {

// The 0-based index of a column, or nullopt with an error.
std::optional<std::size_t> resolve_column(const CsvTable& table, const std::string& file,
                                          const CsvColumn& column, const char* role,
                                          Diagnostics& diagnostics) {
  if (const int* index = std::get_if<int>(&column)) {
    if (*index < 1) {
      diagnostics.push_back(csv_error(file, 0, 0, 1, nullptr,
                                      std::string(role) + " column " + std::to_string(*index) +
                                          " is not a valid column number",
                                      "columns are numbered from 1"));
      return std::nullopt;
    }
    return static_cast<std::size_t>(*index - 1);
  }
  const std::string& name = std::get<std::string>(column);
  for (std::size_t k = 0; k < table.header.size(); ++k) {
    if (std::string(trim(table.header[k])) == name) return k;
  }
  std::string known;
  for (const auto& h : table.header) known += (known.empty() ? "" : ", ") + ("'" + h + "'");
  if (table.header.empty()) {
    diagnostics.push_back(csv_error(file, 0, 0, 1, nullptr,
                                    std::string(role) + " column '" + name +
                                        "' named, but the file has no header row",
                                    std::string("give the column by its number, e.g. ") + role + "=1"));
  } else {
    diagnostics.push_back(csv_error(file, table.header_line, 1, 1, &table,
                                    std::string(role) + " column '" + name +
                                        "' is not in the header",
                                    "the header has " + known));
  }
  return std::nullopt;
}

}  // namespace

std::optional<std::vector<std::pair<double, double>>> samples_from_table(
    const CsvTable& table, const std::string& file, const CsvColumn& time_column,
    const CsvColumn& value_column, double scale, Diagnostics& diagnostics) {
  const auto time_index = resolve_column(table, file, time_column, "time", diagnostics);
  const auto value_index = resolve_column(table, file, value_column, "value", diagnostics);
  if (!time_index || !value_index) return std::nullopt;
  if (table.rows.empty()) {
    diagnostics.push_back(csv_error(file, 0, 0, 1, nullptr, "the CSV file has no data rows"));
    return std::nullopt;
  }

  std::vector<std::pair<double, double>> points;
  points.reserve(table.rows.size());
  for (std::size_t r = 0; r < table.rows.size(); ++r) {
    const auto& row = table.rows[r];
    const int line = table.row_lines[r];
    const std::string row_name = "row " + std::to_string(r + 1) + " (line " +
                                 std::to_string(line) + ")";
    const auto cell = [&](std::size_t index, const char* role) -> std::optional<double> {
      if (index >= row.size()) {
        diagnostics.push_back(csv_error(
            file, line, 1, 1, &table,
            row_name + " has " + std::to_string(row.size()) + " field" +
                (row.size() == 1 ? "" : "s") + ", but the " + role + " is column " +
                std::to_string(index + 1)));
        return std::nullopt;
      }
      const auto value = parse_csv_number(row[index]);
      if (!value) {
        const int column = table.row_columns[r][index];
        diagnostics.push_back(csv_error(
            file, line, column, static_cast<int>(std::max<std::size_t>(row[index].size(), 1)),
            &table, row_name + ": the " + role + " '" + row[index] + "' is not a number",
            "a CSV cell holds a plain decimal number such as 1.5e-6 (no unit or prefix)"));
      }
      return value;
    };
    const auto t = cell(*time_index, "time");
    const auto v = cell(*value_index, "value");
    if (!t || !v) return std::nullopt;
    if (!points.empty() && !(*t > points.back().first)) {
      const int column = table.row_columns[r][*time_index];
      diagnostics.push_back(csv_error(
          file, line, column, static_cast<int>(row[*time_index].size()), &table,
          row_name + ": time " + std::string(trim(row[*time_index])) +
              " does not increase (the row before has " +
              std::to_string(points.back().first) + ")",
          "samples need strictly increasing times"));
      return std::nullopt;
    }
    const double scaled = *v * scale;
    if (!std::isfinite(scaled)) {
      diagnostics.push_back(csv_error(file, line, 1, 1, &table,
                                      row_name + ": the scaled value is not finite"));
      return std::nullopt;
    }
    points.emplace_back(*t, scaled);
  }
  return points;
}

std::optional<std::vector<std::pair<double, double>>> read_samples(
    const std::string& path, const CsvColumn& time_column, const CsvColumn& value_column,
    double scale, Diagnostics& diagnostics, const std::string& file_label) {
  const std::string& label = file_label.empty() ? path : file_label;
  Diagnostics local;
  auto table = read_csv(path, local, CsvHeader::Detect);
  for (auto& d : local) {
    if (d.where.file == path) d.where.file = label;
  }
  diagnostics.insert(diagnostics.end(), local.begin(), local.end());
  if (!table) return std::nullopt;
  return samples_from_table(*table, label, time_column, value_column, scale, diagnostics);
}

}  // namespace ringdown
