// Streaming CSV output of a transient run (CLI.md, `--csv`): RFC 4180
// (Shafranovich 2005): fields separated by commas, records ended by CRLF,
// a field holding a comma, a double quote, CR or LF enclosed in double
// quotes with inner quotes doubled. Header `time,<signal>,...` with the
// signal names as written; numbers with `digits` significant digits
// (default 12), in the shortest of fixed or exponent form (printf %g).
//
// Rows are formatted into a fixed buffer and written as it fills, so memory
// does not grow with the run (issue 3: "CSV streamed"). A NaN or an infinity
// is never written: row() refuses it and the caller reports the failure.
#pragma once

#include <cstddef>
#include <cstdio>
#include <string>
#include <string_view>
#include <vector>

namespace ringdown::cli {

// RFC 4180 quoting of one field (section 2, rules 5-7).
std::string csv_field(std::string_view text);

class CsvWriter {
 public:
  // Default digits: CLI.md, "numbers with 12 significant digits".
  static constexpr int kDefaultDigits = 12;

  CsvWriter(std::FILE* out, int digits);
  ~CsvWriter();
  CsvWriter(const CsvWriter&) = delete;
  CsvWriter& operator=(const CsvWriter&) = delete;

  void header(const std::vector<std::string>& signal_names);
  // Returns false (and writes nothing) when t or a value is not finite.
  bool row(double t, const double* values, std::size_t count);
  // Writes what is buffered; false on an I/O error.
  bool flush();
  std::size_t rows() const { return rows_; }
  // Drops what is buffered and writes nothing more (the run failed; the
  // stream may be closed by its owner next).
  void abandon();

 private:
  void append_number(double value);
  std::FILE* out_;
  int digits_;
  std::vector<char> buffer_;
  std::size_t used_ = 0;
  std::size_t rows_ = 0;
  bool io_error_ = false;
};

}  // namespace ringdown::cli
