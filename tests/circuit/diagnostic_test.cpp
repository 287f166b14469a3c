// Rendering of diagnostics: the exact text of the compiler convention
// (STYLE.md "Diagnostics": file:line:col: error: message, source line,
// caret line, hint line; tabs expanded to 8 columns).
#include <gtest/gtest.h>

#include "parser/diagnostic.hpp"

namespace ringdown {
namespace {

Diagnostic make(Severity severity, std::string file, int line, int column, int length,
                std::string source, std::string message, std::string hint = "") {
  Diagnostic d;
  d.severity = severity;
  d.where = SourcePosition{std::move(file), line, column, length, std::move(source)};
  d.message = std::move(message);
  d.hint = std::move(hint);
  return d;
}

TEST(Diagnostic, ErrorWithCaretAndHint) {
  const auto d = make(Severity::Error, "snub.rlc", 3, 21, 4, "resistor R1 a b 2*Rb rated=1W",
                      "an expression value needs parentheses", "write (2*Rb)");
  // Expected text written by hand from the convention in STYLE.md.
  EXPECT_EQ(render(d),
            "snub.rlc:3:21: error: an expression value needs parentheses\n"
            "resistor R1 a b 2*Rb rated=1W\n"
            "                    ^~~~\n"
            "hint: write (2*Rb)\n");
}

TEST(Diagnostic, WarningAndNoteWords) {
  auto d = make(Severity::Warning, "f.rlc", 1, 1, 1, "x", "w");
  EXPECT_EQ(render(d), "f.rlc:1:1: warning: w\nx\n^\n");
  d.severity = Severity::Note;
  EXPECT_EQ(render(d), "f.rlc:1:1: note: w\nx\n^\n");
}

TEST(Diagnostic, TabsExpandToEightColumns) {
  // "\tcapacitor\tC1": C1 starts at byte column 12. Displayed: the tab fills
  // columns 1-8, "capacitor" 9-17, the second tab 18-24, so C1 is at column 25.
  const auto d = make(Severity::Error, "t.rlc", 7, 12, 2, "\tcapacitor\tC1 a b 1u", "bad");
  EXPECT_EQ(render(d),
            "t.rlc:7:12: error: bad\n"
            "        capacitor       C1 a b 1u\n"   // 8 + 9 + 7 columns before C1
            "                        ^~\n");       // 24 spaces
}

TEST(Diagnostic, TokenAfterMultibyteCharacterAlignsByCharacter) {
  // "Ω" is two bytes but one column: the caret under "x" (byte column 7)
  // sits at display column 6.
  const auto d = make(Severity::Error, "u.rlc", 2, 7, 1, "R=4\xCE\xA9 x", "bad");
  EXPECT_EQ(render(d), "u.rlc:2:7: error: bad\nR=4\xCE\xA9 x\n     ^\n");
}

TEST(Diagnostic, NoPosition) {
  EXPECT_EQ(render(make(Severity::Error, "big.rlc", 0, 0, 1, "", "file is empty")),
            "big.rlc: error: file is empty\n");
  EXPECT_EQ(render(make(Severity::Error, "", 0, 0, 1, "", "--set needs NAME=VALUE", "e.g. --set R=1k")),
            "error: --set needs NAME=VALUE\nhint: e.g. --set R=1k\n");
}

TEST(Diagnostic, CaretClampedToLine) {
  // A length running past the end of the line is cut at the line's end;
  // a column just past the end (an unexpected end of line) still shows.
  EXPECT_EQ(render(make(Severity::Error, "c.rlc", 4, 5, 99, "use X", "bad")),
            "c.rlc:4:5: error: bad\nuse X\n    ^\n");
  EXPECT_EQ(render(make(Severity::Error, "c.rlc", 4, 6, 1, "use X", "expected '('")),
            "c.rlc:4:6: error: expected '('\nuse X\n     ^\n");
}

TEST(Diagnostic, HasErrors) {
  Diagnostics list;
  EXPECT_FALSE(has_errors(list));
  list.push_back(make(Severity::Warning, "f", 1, 1, 1, "", "w"));
  EXPECT_FALSE(has_errors(list));
  list.push_back(make(Severity::Error, "f", 1, 1, 1, "", "e"));
  EXPECT_TRUE(has_errors(list));
}

}  // namespace
}  // namespace ringdown
