// See csv_writer.hpp.
#include "cli/csv_writer.hpp"

#include <cmath>
#include <cstring>

namespace ringdown::cli {

namespace {

// Flush threshold: 256 KiB keeps write(2) calls rare without holding much
// memory (common practice, no source).
constexpr std::size_t kBufferBytes = 256 * 1024;
// Longest number: sign, 17 digits, point, "e-308": well under 40 bytes.
constexpr std::size_t kNumberBytes = 40;
// RFC 4180 section 2, rule 1: records end with CRLF.
constexpr const char* kRecordEnd = "\r\n";

}  // namespace

std::string csv_field(std::string_view text) {
  const bool needs_quotes = text.find_first_of(",\"\r\n") != std::string_view::npos ||
                            (!text.empty() && (text.front() == ' ' || text.back() == ' '));
  if (!needs_quotes) return std::string(text);
  std::string out = "\"";
  for (char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
  return out;
}

CsvWriter::CsvWriter(std::FILE* out, int digits)
    : out_(out), digits_(digits), buffer_(kBufferBytes + 4096) {}

CsvWriter::~CsvWriter() {
  if (out_) flush();
}

void CsvWriter::abandon() {
  used_ = 0;
  out_ = nullptr;
}

void CsvWriter::header(const std::vector<std::string>& signal_names) {
  std::string line = "time";
  for (const std::string& name : signal_names) line += "," + csv_field(name);
  line += kRecordEnd;
  if (!out_) return;
  flush();
  if (std::fwrite(line.data(), 1, line.size(), out_) != line.size()) io_error_ = true;
}

void CsvWriter::append_number(double value) {
  if (value == 0) value = 0;  // no "-0" in the file
  const int n = std::snprintf(buffer_.data() + used_, kNumberBytes, "%.*g", digits_, value);
  used_ += static_cast<std::size_t>(n);
}

bool CsvWriter::row(double t, const double* values, std::size_t count) {
  if (!out_ || !std::isfinite(t)) return false;
  for (std::size_t i = 0; i < count; ++i) {
    if (!std::isfinite(values[i])) return false;
  }
  const std::size_t need = (count + 1) * (kNumberBytes + 1) + 2;
  if (buffer_.size() < need) buffer_.resize(need + kBufferBytes);
  if (used_ + need > buffer_.size()) flush();
  append_number(t);
  for (std::size_t i = 0; i < count; ++i) {
    buffer_[used_++] = ',';
    append_number(values[i]);
  }
  buffer_[used_++] = '\r';
  buffer_[used_++] = '\n';
  ++rows_;
  if (used_ >= kBufferBytes) flush();
  return true;
}

bool CsvWriter::flush() {
  if (!out_) return false;
  if (used_ > 0) {
    if (std::fwrite(buffer_.data(), 1, used_, out_) != used_) io_error_ = true;
    used_ = 0;
  }
  if (std::fflush(out_) != 0) io_error_ = true;
  return !io_error_;
}

}  // namespace ringdown::cli
