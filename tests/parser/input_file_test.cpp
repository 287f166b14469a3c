// Files that are not circuit text: a directory, a binary, control characters.
// Each gives one clear, positioned error and nothing that garbles a terminal
// (common practice for command-line tools, no source).
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <string>

#include "parser/diagnostic.hpp"
#include "parser_test_util.hpp"

namespace ringdown {
namespace {

TEST(InputFile, DirectoryIsAClearError) {
  const auto dir = std::filesystem::temp_directory_path();
  LoadResult r = load_file(dir.string());
  ASSERT_FALSE(r.ok());
  ASSERT_EQ(r.diagnostics.size(), 1u);
  EXPECT_NE(r.diagnostics[0].message.find("is a directory"), std::string::npos);
}

TEST(InputFile, BinaryGivesOneErrorWithoutItsBytes) {
  std::string text = "resistor R1 a gnd 1k\n";
  text += std::string("\x7f" "ELF\0\0\x01\x02\n\x03\x04garbage\n", 18);
  LoadResult r = testing::load(text);
  ASSERT_FALSE(r.ok());
  int errors = 0;
  for (const Diagnostic& d : r.diagnostics) errors += d.severity == Severity::Error;
  EXPECT_EQ(errors, 1) << testing::all_messages(r);
  const Diagnostic* d = testing::find_diagnostic(r, "not a text file");
  ASSERT_NE(d, nullptr);
  EXPECT_EQ(d->where.line, 2);
  EXPECT_EQ(d->where.column, 5);
  EXPECT_TRUE(d->where.source_line.empty());
}

TEST(InputFile, ControlCharactersAreShownEscaped) {
  LoadResult r = testing::load("resistor R1 a gnd 1k\x1b[31m\n");
  ASSERT_FALSE(r.ok());
  ASSERT_FALSE(r.diagnostics.empty());
  const std::string text = render(r.diagnostics[0]);
  EXPECT_EQ(text.find('\x1b'), std::string::npos) << text;
  EXPECT_NE(text.find("\\x1b"), std::string::npos) << text;
}

}  // namespace
}  // namespace ringdown
