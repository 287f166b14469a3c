// CSV reading per RFC 4180 (Shafranovich 2005, section 2 rules 1-7, from
// memory), and the `samples()` columns of NETLIST.md section 5.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "parser/csv.hpp"

namespace ringdown {
namespace {

CsvTable parse_ok(std::string_view text, CsvHeader header = CsvHeader::Detect) {
  Diagnostics d;
  auto table = parse_csv(text, "t.csv", d, header);
  EXPECT_TRUE(table.has_value());
  EXPECT_TRUE(d.empty());
  return table.value_or(CsvTable{});
}

using Row = std::vector<std::string>;

TEST(Csv, PlainRecordsLfAndCrlf) {
  // RFC 4180 rules 1-2: records end with CRLF; the last may lack one. LF alone is accepted.
  for (std::string_view text : {"1,2\r\n3,4\r\n", "1,2\n3,4", "1,2\r\n3,4"}) {
    const auto t = parse_ok(text);
    ASSERT_EQ(t.rows.size(), 2u) << text;
    EXPECT_EQ(t.rows[0], (Row{"1", "2"}));
    EXPECT_EQ(t.rows[1], (Row{"3", "4"}));
    EXPECT_EQ(t.row_lines, (std::vector<int>{1, 2}));
    EXPECT_TRUE(t.header.empty());
  }
}

TEST(Csv, HeaderDetectedWhenFirstRecordIsNotNumeric) {
  // RFC 4180 rule 3: an optional header line with the same format.
  const auto t = parse_ok("time,Ch1\n0,1\n");
  EXPECT_EQ(t.header, (Row{"time", "Ch1"}));
  EXPECT_EQ(t.header_line, 1);
  ASSERT_EQ(t.rows.size(), 1u);
  EXPECT_EQ(t.row_lines[0], 2);
  EXPECT_TRUE(parse_ok("time,Ch1\n", CsvHeader::Absent).header.empty());
}

TEST(Csv, QuotedFieldsCommasNewlinesAndDoubledQuotes) {
  // RFC 4180 rules 5-7: fields may be quoted; quoted fields may hold commas,
  // line breaks and quotes, a quote being written twice.
  const auto t = parse_ok("\"a,b\",\"say \"\"hi\"\"\",\"two\r\nlines\"\r\nx,,\"\"\r\n",
                          CsvHeader::Absent);
  ASSERT_EQ(t.rows.size(), 2u);
  EXPECT_EQ(t.rows[0], (Row{"a,b", "say \"hi\"", "two\r\nlines"}));
  EXPECT_EQ(t.rows[1], (Row{"x", "", ""}));  // empty fields, quoted or not
  EXPECT_EQ(t.row_lines, (std::vector<int>{1, 3}));  // the embedded line break counts
  EXPECT_EQ(t.row_columns[0], (std::vector<int>{1, 7, 20}));
}

TEST(Csv, SpacesAreKeptInUnquotedFields) {
  // RFC 4180 rule 4: spaces are part of a field.
  const auto t = parse_ok(" a , b\n", CsvHeader::Absent);
  EXPECT_EQ(t.rows[0], (Row{" a ", " b"}));
}

TEST(Csv, BlankLinesAndByteOrderMarkSkipped) {
  const auto t = parse_ok("\xEF\xBB\xBFt,v\n\n0,1\n\n2,3\n");
  EXPECT_EQ(t.header, (Row{"t", "v"}));
  ASSERT_EQ(t.rows.size(), 2u);
  EXPECT_EQ(t.row_lines, (std::vector<int>{3, 5}));
}

TEST(Csv, MalformedQuotingIsAPositionedError) {
  Diagnostics d;
  EXPECT_FALSE(parse_csv("0,1\n\"open,2\n3,4\n", "cap.csv", d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.file, "cap.csv");
  EXPECT_EQ(d[0].where.line, 2);  // where the quote opened
  EXPECT_EQ(d[0].where.column, 1);
  EXPECT_NE(d[0].message.find("not closed"), std::string::npos);

  d.clear();
  EXPECT_FALSE(parse_csv("0,\"1\"x\n", "cap.csv", d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.line, 1);
  EXPECT_EQ(d[0].where.column, 6);
  EXPECT_EQ(d[0].where.source_line, "0,\"1\"x");

  d.clear();
  EXPECT_FALSE(parse_csv("0,ab\"c\"\n", "cap.csv", d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.column, 5);
}

TEST(Csv, Numbers) {
  EXPECT_EQ(parse_csv_number("1.5e-6"), 1.5e-6);
  EXPECT_EQ(parse_csv_number(" -2 "), -2);
  EXPECT_EQ(parse_csv_number("+3.25"), 3.25);
  EXPECT_EQ(parse_csv_number(".5"), 0.5);
  EXPECT_FALSE(parse_csv_number(""));
  EXPECT_FALSE(parse_csv_number("1k"));
  EXPECT_FALSE(parse_csv_number("nan"));
  EXPECT_FALSE(parse_csv_number("inf"));
  EXPECT_FALSE(parse_csv_number("0x10"));
  EXPECT_FALSE(parse_csv_number("1e999"));
  EXPECT_FALSE(parse_csv_number("1,5"));
}

class Samples : public ::testing::Test {
 protected:
  std::string write(const std::string& name, const std::string& text) {
    const auto dir = std::filesystem::path(::testing::TempDir()) / "ringdown_csv_test";
    std::filesystem::create_directories(dir);
    const auto path = (dir / name).string();
    std::ofstream(path, std::ios::binary) << text;
    return path;
  }
};

TEST_F(Samples, ByHeaderNameWithScale) {
  const auto path = write("scope.csv", "Time,CH1,CH2\r\n-1e-6,0.1,5\r\n0,0.2,6\r\n1e-6,0.4,7\r\n");
  Diagnostics d;
  const auto p = read_samples(path, std::string("Time"), std::string("CH2"), 10, d);
  ASSERT_TRUE(p.has_value()) << (d.empty() ? "" : render(d[0]));
  ASSERT_EQ(p->size(), 3u);
  EXPECT_EQ((*p)[0], (std::pair<double, double>{-1e-6, 50}));
  EXPECT_EQ((*p)[2], (std::pair<double, double>{1e-6, 70}));
}

TEST_F(Samples, ByIndexWithoutHeader) {
  const auto path = write("plain.csv", "0,1,2\n1e-3,3,4\n");
  Diagnostics d;
  const auto p = read_samples(path, 1, 3, 1, d);
  ASSERT_TRUE(p.has_value());
  EXPECT_EQ((*p)[1], (std::pair<double, double>{1e-3, 4}));
  // By name without a header: an error with a hint.
  EXPECT_FALSE(read_samples(path, std::string("t"), 2, 1, d).has_value());
  ASSERT_FALSE(d.empty());
  EXPECT_NE(d.back().message.find("no header"), std::string::npos);
}

TEST_F(Samples, BadRowsNameFileAndLine) {
  Diagnostics d;
  // Not a number, at line 3 (the header is line 1).
  const auto bad = write("bad.csv", "t,v\n0,1\n1e-3,oops\n");
  EXPECT_FALSE(read_samples(bad, 1, 2, 1, d, "bad.csv").has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.file, "bad.csv");
  EXPECT_EQ(d[0].where.line, 3);
  EXPECT_EQ(d[0].where.column, 6);
  EXPECT_EQ(d[0].where.length, 4);
  EXPECT_NE(d[0].message.find("'oops' is not a number"), std::string::npos);

  // Missing column.
  d.clear();
  const auto short_row = write("short.csv", "0,1\n1,2\n2\n");
  EXPECT_FALSE(read_samples(short_row, 1, 2, 1, d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.line, 3);
  EXPECT_NE(d[0].message.find("has 1 field"), std::string::npos);

  // Time not increasing.
  d.clear();
  const auto back = write("back.csv", "0,1\n2e-3,2\n2e-3,3\n");
  EXPECT_FALSE(read_samples(back, 1, 2, 1, d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.line, 3);
  EXPECT_NE(d[0].message.find("does not increase"), std::string::npos);

  // Unknown header name: the message lists the header.
  d.clear();
  const auto named = write("named.csv", "time,volts\n0,1\n");
  EXPECT_FALSE(read_samples(named, std::string("time"), std::string("amps"), 1, d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_NE(d[0].hint.find("'volts'"), std::string::npos);

  // Missing file: an error without a line (the caller positions it at the samples() call).
  d.clear();
  EXPECT_FALSE(read_samples(named + ".missing", 1, 2, 1, d).has_value());
  ASSERT_EQ(d.size(), 1u);
  EXPECT_EQ(d[0].where.line, 0);
  EXPECT_TRUE(has_errors(d));
}

}  // namespace
}  // namespace ringdown
