// format_text: the canonical layout of `ringdown fmt` (docs/language.md,
// "Canonical layout").
//
// The file must parse (syntax only: names need not resolve). The layout is
// then rebuilt from the statement's tokens, keeping comments and the user's
// line breaks inside open parentheses:
//  - statements start at column 1, or 2 spaces deeper per enclosing block;
//    continuation lines 4 further;
//  - element kinds, `use` and `couple` are padded to a 10-column keyword
//    field; every other field is separated by one space;
//  - key=value and named arguments without spaces; `NAME = EXPR`,
//    `report N = F`, `sweep P = L`, `record n = S` and expect comparisons
//    with one space each side;
//  - `, ` after commas, nothing inside parentheses, binary + and - spaced,
//    * / ^ tight; a minus written as a sign (space before, none after) stays
//    a sign;
//  - a trailing comment follows two spaces; comment lines are indented like
//    statements; runs of blank lines become one; none at the start or end;
//  - a run of consecutive one-line element statements (or of `NAME = EXPR`
//    lines, or of `report N = F` lines) at the same depth is a table: each field is padded to the widest
//    field of its column in the run (a row's last field pads nothing), and
//    the run's trailing comments start in one column, two spaces after the
//    longest commented row. A blank line, a comment line or any other
//    statement ends the run.
// Every rule depends only on the tokens and on spacing the rules themselves
// produce, so formatting twice gives the same text.
#include <algorithm>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "parser/load.hpp"
#include "parser/source.hpp"

namespace ringdown {

namespace detail {
bool check_syntax(std::string_view text, const std::string& file_name, Diagnostics& diagnostics);
}

namespace {

enum class TokenKind { Word, String, Punct };

struct Token {
  std::string text;
  TokenKind kind = TokenKind::Word;
  std::size_t line = 0;  // 0-based physical line
  bool space_before = false;
  bool space_after = false;
  int depth = 0;          // parenthesis depth before the token
  bool spaced = false;    // '=' / comparison with spaces; +/- binary
};

bool word_char(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
         c == '.' || c == '%' || static_cast<unsigned char>(c) >= 0x80;
}
bool blank(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v' || c == '\n'; }

std::vector<Token> tokenize(const SourceFile& f, const RawStatement& st) {
  std::vector<Token> out;
  const char* base = f.code.data();
  const char* p = st.first;
  int depth = 0;
  while (p < st.last) {
    if (blank(*p)) {
      if (!out.empty()) out.back().space_after = true;
      ++p;
      continue;
    }
    Token t;
    t.line = f.line_of(static_cast<std::size_t>(p - base));
    t.space_before = p > st.first && blank(p[-1]);
    t.depth = depth;
    const char* q = p;
    if (*p == '"') {
      ++q;
      while (q < st.last && *q != '"' && *q != '\n') ++q;
      if (q < st.last && *q == '"') ++q;
      t.kind = TokenKind::String;
    } else if (word_char(*p)) {
      const bool numeric = (*p >= '0' && *p <= '9') || *p == '.';
      while (q < st.last && word_char(*q)) {
        ++q;
        // 1e-9: the exponent's sign belongs to the number.
        if (numeric && (q[-1] == 'e' || q[-1] == 'E') && q + 1 < st.last && (*q == '+' || *q == '-') &&
            q[1] >= '0' && q[1] <= '9')
          ++q;
      }
      t.kind = TokenKind::Word;
    } else {
      ++q;
      if ((*p == '<' || *p == '>' || *p == '=') && q < st.last && *q == '=') ++q;
      t.kind = TokenKind::Punct;
      if (*p == '(') ++depth;
      if (*p == ')') depth = std::max(0, depth - 1);
    }
    t.text.assign(p, q);
    out.push_back(std::move(t));
    p = q;
  }
  return out;
}

bool operand_end(const Token& t) {
  return t.kind != TokenKind::Punct || t.text == ")";
}

const std::set<std::string>& padded_keywords() {
  static const std::set<std::string> words = {"resistor", "capacitor", "inductor", "voltage",
                                              "current",  "vcvs",      "vccs",     "ccvs",
                                              "cccs",     "switch",    "use",      "couple"};
  return words;
}
constexpr std::size_t kKeywordField = 10;  // "capacitor" + one space

// Decide which '=' and comparisons get spaces, and which +/- are binary.
void classify(std::vector<Token>& tokens) {
  if (tokens.empty()) return;
  const std::string first = tokens[0].text;
  const bool parameter = tokens.size() > 1 && tokens[0].kind == TokenKind::Word && tokens[1].text == "=";
  bool first_eq_done = false;
  for (std::size_t k = 0; k < tokens.size(); ++k) {
    Token& t = tokens[k];
    if (t.kind != TokenKind::Punct) continue;
    if (t.text == "=" || t.text == "<" || t.text == "<=" || t.text == ">" || t.text == ">=") {
      if (t.depth > 0) continue;
      if (t.text != "=") {
        t.spaced = true;
      } else if (parameter || first == "report" || first == "sweep") {
        if (!first_eq_done) t.spaced = true;
        first_eq_done = true;
      } else if (first == "record" || first == "expect") {
        t.spaced = true;
      }
    } else if (t.text == "+" || t.text == "-") {
      const bool after_operand = k > 0 && operand_end(tokens[k - 1]) && tokens[k - 1].line == t.line;
      const bool sign_style = t.space_before && !t.space_after;
      t.spaced = after_operand && !sign_style;
    }
  }
}

std::string separator(const std::vector<Token>& tokens, std::size_t k) {
  const Token& a = tokens[k - 1];
  const Token& b = tokens[k];
  if (k == 1 && padded_keywords().count(a.text)) {
    return std::string(a.text.size() < kKeywordField ? kKeywordField - a.text.size() : 1, ' ');
  }
  if (b.text == "," || b.text == ")") return "";
  if (a.text == "(") return "";
  if (a.text == ",") return " ";
  auto is = [](const Token& t, std::initializer_list<const char*> words) {
    if (t.kind != TokenKind::Punct) return false;
    for (const char* w : words) {
      if (t.text == w) return true;
    }
    return false;
  };
  if (is(a, {"=", "<", "<=", ">", ">="})) return a.spaced ? " " : "";
  if (is(b, {"=", "<", "<=", ">", ">="})) return b.spaced ? " " : "";
  if (is(a, {"*", "/", "^"}) || is(b, {"*", "/", "^"})) return "";
  if (is(b, {"+", "-"})) return b.spaced ? " " : (operand_end(a) ? " " : "");
  if (is(a, {"+", "-"})) return a.spaced ? " " : "";
  if (b.text == "(") {
    if (a.kind == TokenKind::Word) return b.space_before ? " " : "";
    return operand_end(a) ? " " : "";
  }
  return " ";
}

// Element keywords whose lines form tables (use and couple lines have other shapes).
bool table_keyword(const std::string& w) { return padded_keywords().count(w) && w != "use" && w != "couple"; }

// One output line before alignment.
struct Row {
  enum class Kind { Element, Parameter, Report, Other } kind = Kind::Other;
  std::string indent;
  std::vector<std::string> fields;  // Element/Parameter: the cells; Other: one cell, the text
  std::string comment;              // trailing comment, "" when none
  bool blank_before = false;
};

// The cells of a one-line statement: a new cell starts at each top-level single space
// between fields (not around a spaced operator); the keyword's padding is the keyword field.
std::vector<std::string> cells(const std::vector<Token>& tokens) {
  std::vector<std::string> out;
  std::string cell;
  for (std::size_t k = 0; k < tokens.size(); ++k) {
    if (k > 0) {
      const std::string sep = separator(tokens, k);
      const bool operator_space = tokens[k - 1].spaced || tokens[k].spaced;
      const bool boundary = k == 1 || (sep == " " && tokens[k].depth == 0 && !operator_space &&
                                       tokens[k].text != "(");
      if (boundary) {
        out.push_back(cell);
        cell.clear();
      } else {
        cell += sep;
      }
    }
    cell += tokens[k].text;
  }
  out.push_back(cell);
  return out;
}

std::string rtrim(std::string s) {
  while (!s.empty() && blank(s.back())) s.pop_back();
  return s;
}

}  // namespace

std::optional<std::string> format_text(std::string_view text, const std::string& file_name,
                                       Diagnostics& diagnostics) {
  if (!detail::check_syntax(text, file_name, diagnostics)) return std::nullopt;
  SourceFile f;
  f.path = file_name;
  f.text = std::string(text);
  f.prepare();
  std::vector<SplitProblem> problems;
  const std::vector<RawStatement> statements = split_statements(f, problems);

  std::vector<Row> rows;
  bool pending_blank = false;
  int block_depth = 0;
  auto comment_of = [&](std::size_t line) -> std::string {
    if (f.comment_start[line] == std::string::npos) return "";
    const std::size_t begin = f.comment_start[line];
    const std::size_t end = line + 1 < f.line_starts.size() ? f.line_starts[line + 1] - 1 : f.text.size();
    return rtrim(f.text.substr(begin, end - begin));
  };
  auto emit_row = [&](Row r) {
    r.blank_before = pending_blank && !rows.empty();
    pending_blank = false;
    rows.push_back(std::move(r));
  };
  auto emit_line = [&](const std::string& s) {
    Row r;
    r.fields.push_back(s);
    emit_row(std::move(r));
  };
  auto indent = [&](int extra) { return std::string(static_cast<std::size_t>(2 * block_depth + extra), ' '); };

  std::size_t next = 0;  // next statement
  std::size_t line = 0;
  const std::size_t lines = f.line_starts.size();
  while (line < lines) {
    const bool starts_statement =
        next < statements.size() && f.line_of(f.offset(statements[next].first)) == line;
    if (!starts_statement) {
      std::string comment = comment_of(line);
      if (!comment.empty()) {
        emit_line(indent(0) + comment);
      } else if (rtrim(f.line_text(line)).empty()) {
        pending_blank = true;
      }
      ++line;
      continue;
    }
    const RawStatement& st = statements[next++];
    std::vector<Token> tokens = tokenize(f, st);
    classify(tokens);
    const std::string keyword = tokens.empty() ? "" : tokens[0].text;
    const bool is_end = keyword == "end" && tokens.size() == 1;
    if (is_end && block_depth > 0) --block_depth;
    const std::size_t last_line = f.line_of(f.offset(st.last > st.first ? st.last - 1 : st.first));
    const bool parameter = tokens.size() > 2 && tokens[0].kind == TokenKind::Word && tokens[1].text == "=";
    const bool report = keyword == "report" && tokens.size() > 3 && tokens[2].text == "=";
    if (last_line == line && tokens.size() > 1 && (table_keyword(keyword) || parameter || report)) {
      Row r;
      r.kind = parameter ? Row::Kind::Parameter : report ? Row::Kind::Report : Row::Kind::Element;
      r.indent = indent(0);
      if (parameter || report) {
        const std::size_t eq = parameter ? 1 : 2;
        std::string rest = "=";
        for (std::size_t k = eq + 1; k < tokens.size(); ++k) rest += separator(tokens, k) + tokens[k].text;
        r.fields.clear();
        for (std::size_t k = 0; k < eq; ++k) r.fields.push_back(tokens[k].text);
        r.fields.push_back(rest);
      } else {
        r.fields = cells(tokens);
        r.fields[0] += std::string(keyword.size() < kKeywordField - 1 ? kKeywordField - 1 - keyword.size() : 0, ' ');
      }
      r.comment = comment_of(line);
      emit_row(std::move(r));
      line = last_line + 1;
      continue;
    }
    std::size_t k = 0;
    for (std::size_t l = line; l <= last_line; ++l) {
      std::string s;
      bool any = false;
      while (k < tokens.size() && tokens[k].line == l) {
        if (any) s += separator(tokens, k);
        s += tokens[k].text;
        any = true;
        ++k;
      }
      std::string comment = comment_of(l);
      if (!any && comment.empty()) continue;
      std::string prefix = indent(l == line ? 0 : 4);
      if (!any) {
        emit_line(prefix + comment);
      } else {
        emit_line(prefix + s + (comment.empty() ? "" : "  " + comment));
      }
    }
    if (keyword == "block") ++block_depth;
    line = last_line + 1;
  }

  // Tables: runs of rows of one kind at one indentation, with no blank line inside.
  std::string out;
  for (std::size_t i = 0; i < rows.size();) {
    std::size_t j = i + 1;
    if (rows[i].kind != Row::Kind::Other)
      while (j < rows.size() && rows[j].kind == rows[i].kind && rows[j].indent == rows[i].indent &&
             !rows[j].blank_before)
        ++j;
    std::vector<std::size_t> width;
    for (std::size_t r = i; r < j; ++r)
      for (std::size_t c = 0; c + 1 < rows[r].fields.size(); ++c) {
        if (width.size() <= c) width.resize(c + 1, 0);
        width[c] = std::max(width[c], rows[r].fields[c].size());
      }
    std::vector<std::string> texts;
    std::size_t comment_column = 0;
    for (std::size_t r = i; r < j; ++r) {
      const Row& row = rows[r];
      std::string t = row.indent;
      for (std::size_t c = 0; c < row.fields.size(); ++c) {
        if (c > 0) t += ' ';
        t += row.fields[c];
        if (c + 1 < row.fields.size() && row.kind != Row::Kind::Other)
          t += std::string(width[c] - row.fields[c].size(), ' ');
      }
      if (!row.comment.empty()) comment_column = std::max(comment_column, t.size() + 2);
      texts.push_back(std::move(t));
    }
    for (std::size_t r = i; r < j; ++r) {
      const Row& row = rows[r];
      if (row.blank_before) out += '\n';
      std::string t = texts[r - i];
      if (!row.comment.empty()) t += std::string(comment_column - t.size(), ' ') + row.comment;
      out += t;
      out += '\n';
    }
    i = j;
  }
  return out;
}

}  // namespace ringdown
