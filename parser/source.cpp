// Line table, comment blanking and statement splitting (see source.hpp).
#include "parser/source.hpp"

#include <algorithm>

namespace ringdown {

namespace {

bool is_blank(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v'; }
bool is_word_char(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_';
}

}  // namespace

const std::vector<std::string>& statement_keywords() {
  static const std::vector<std::string> words = {
      "title",  "block",  "end",    "use",       "include",  "transient", "frequency",
      "modes",  "record", "report", "expect",    "sweep",    "trials",    "resistor",
      "capacitor", "inductor", "voltage", "current", "vcvs", "vccs",     "ccvs",
      "cccs",   "couple", "switch"};
  return words;
}

bool is_statement_keyword(const std::string& word) {
  const auto& words = statement_keywords();
  return std::find(words.begin(), words.end(), word) != words.end();
}

void SourceFile::prepare() {
  code = text;
  line_starts.assign(1, 0);
  comment_start.assign(1, std::string::npos);
  bool in_string = false;
  bool in_comment = false;
  for (std::size_t k = 0; k < code.size(); ++k) {
    char& c = code[k];
    if (c == '\n') {
      in_string = false;
      in_comment = false;
      line_starts.push_back(k + 1);
      comment_start.push_back(std::string::npos);
      continue;
    }
    if (in_comment) {
      c = ' ';
    } else if (in_string) {
      if (c == '"') in_string = false;
    } else if (c == '"') {
      in_string = true;
    } else if (c == '#') {
      in_comment = true;
      comment_start.back() = k;
      c = ' ';
    }
  }
}

std::size_t SourceFile::line_of(std::size_t off) const {
  auto it = std::upper_bound(line_starts.begin(), line_starts.end(), off);
  return static_cast<std::size_t>(it - line_starts.begin()) - 1;
}

std::string SourceFile::line_text(std::size_t line) const {
  if (line >= line_starts.size()) return {};
  std::size_t begin = line_starts[line];
  std::size_t end = line + 1 < line_starts.size() ? line_starts[line + 1] - 1 : text.size();
  if (end > begin && text[end - 1] == '\r') --end;
  return text.substr(begin, end - begin);
}

SourcePosition SourceFile::position(const char* first, const char* last) const {
  SourcePosition where;
  where.file = path;
  std::size_t off = std::min(offset(first), code.size());
  std::size_t line = line_of(off);
  where.line = command_line ? 0 : static_cast<int>(line) + 1;
  where.column = static_cast<int>(off - line_starts[line]) + 1;
  where.source_line = line_text(line);
  // Underline up to the end of the range, but not past the end of the line.
  std::size_t end = last ? std::min(offset(last), code.size()) : off + 1;
  std::size_t line_end = line_starts[line] + where.source_line.size();
  end = std::min(end, std::max(line_end, off + 1));
  where.length = std::max(1, static_cast<int>(end > off ? end - off : 1));
  return where;
}

std::vector<RawStatement> split_statements(const SourceFile& file,
                                           std::vector<SplitProblem>& problems) {
  std::vector<RawStatement> out;
  const std::string& code = file.code;
  const char* base = code.data();
  const std::size_t lines = file.line_starts.size();
  std::size_t line = 0;
  while (line < lines) {
    std::size_t begin = file.line_starts[line];
    std::size_t end = line + 1 < lines ? file.line_starts[line + 1] - 1 : code.size();
    std::size_t k = begin;
    while (k < end && (is_blank(code[k]))) ++k;
    if (k == end) {  // blank or comment-only line
      ++line;
      continue;
    }
    RawStatement st;
    st.first = base + k;
    std::vector<std::size_t> open;  // offsets of unmatched '('
    bool in_string = false;
    for (;;) {
      for (std::size_t j = k; j < end; ++j) {
        const char c = code[j];
        if (in_string) {
          if (c == '"') in_string = false;
        } else if (c == '"') {
          in_string = true;
        } else if (c == '(') {
          open.push_back(j);
        } else if (c == ')') {
          if (!open.empty()) open.pop_back();
        }
      }
      in_string = false;  // strings end at the end of a line
      std::size_t stop = end;
      ++line;
      if (open.empty() || line >= lines) {
        if (!open.empty()) {
          problems.push_back({base + open.back(), "this '(' is never closed",
                              "close it with ')' (a statement continues on the next line "
                              "while a parenthesis is open)"});
        }
        while (stop > k && (is_blank(code[stop - 1]))) --stop;
        st.last = base + stop;
        break;
      }
      // Continue on the next line, unless it clearly starts a new statement.
      std::size_t nb = file.line_starts[line];
      std::size_t ne = line + 1 < lines ? file.line_starts[line + 1] - 1 : code.size();
      std::size_t w = nb;
      while (w < ne && is_blank(code[w])) ++w;
      std::size_t we = w;
      while (we < ne && is_word_char(code[we])) ++we;
      std::string word = code.substr(w, we - w);
      std::size_t after = we;
      while (after < ne && is_blank(code[after])) ++after;
      const bool starts_statement =
          is_statement_keyword(word) && !(after < ne && (code[after] == '=' || code[after] == ','));
      if (starts_statement) {
        problems.push_back({base + open.back(), "this '(' is never closed",
                            "close it with ')' before the end of the statement"});
        while (stop > k && (is_blank(code[stop - 1]))) --stop;
        st.last = base + stop;
        break;
      }
      k = nb;
      end = ne;
    }
    out.push_back(st);
  }
  return out;
}

}  // namespace ringdown
