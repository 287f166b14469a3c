// A CSV reader after RFC 4180 (Shafranovich 2005, "Common Format and MIME
// Type for Comma-Separated Values (CSV) Files"): fields separated by commas,
// records by CRLF or LF, fields in double quotes may hold commas, line breaks
// and doubled quotes (""). Departures, for files that scopes and
// spreadsheets write: LF alone ends a record, blank lines are skipped, a
// UTF-8 byte-order mark is ignored, and records may have different field
// counts (checked by the user of the table, who knows which columns it needs).
//
// Also the reader behind `samples("file.csv", time=, value=, scale=)`
// (NETLIST.md section 5). Problems come back as Diagnostics naming the file
// and line; nothing here prints or throws on bad input.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <variant>
#include <vector>

#include "parser/diagnostic.hpp"

namespace ringdown {

struct CsvTable {
  std::vector<std::string> header;              // empty when the file has none
  std::vector<std::vector<std::string>> rows;   // data records (header excluded)
  std::vector<int> row_lines;                   // 1-based line where each row starts
  std::vector<std::vector<int>> row_columns;    // 1-based byte column where each field starts
  int header_line = 0;                          // 0 when there is no header
  std::vector<std::string> lines;               // the file's physical lines (for diagnostics)
};

enum class CsvHeader {
  Detect,  // the first record is a header when some field of it is not a number
  Present,
  Absent,
};

// Parse CSV text held in memory; `file` names it in diagnostics.
std::optional<CsvTable> parse_csv(std::string_view text, const std::string& file,
                                  Diagnostics& diagnostics, CsvHeader header = CsvHeader::Detect);
// Read and parse a file. A file that cannot be read is an error with line 0.
std::optional<CsvTable> read_csv(const std::string& path, Diagnostics& diagnostics,
                                 CsvHeader header = CsvHeader::Detect);

// A number as CSV cells hold it: optional spaces, sign, digits, point,
// exponent; nothing else (no SI prefixes, no "nan"/"inf").
std::optional<double> parse_csv_number(std::string_view field);

// A column of a table: 1-based index, or a header name.
using CsvColumn = std::variant<int, std::string>;

// The (time, value * scale) pairs of two columns, for `samples()`. Errors
// (file missing, unknown column, a row that is not numeric, lacks the column,
// or whose time does not increase) name the file and the row's line.
// `file_label` is the name used in diagnostics (defaults to `path`).
std::optional<std::vector<std::pair<double, double>>> read_samples(
    const std::string& path, const CsvColumn& time_column, const CsvColumn& value_column,
    double scale, Diagnostics& diagnostics, const std::string& file_label = "");

// Same on a parsed table (for tests and for text already in memory).
std::optional<std::vector<std::pair<double, double>>> samples_from_table(
    const CsvTable& table, const std::string& file, const CsvColumn& time_column,
    const CsvColumn& value_column, double scale, Diagnostics& diagnostics);

}  // namespace ringdown
