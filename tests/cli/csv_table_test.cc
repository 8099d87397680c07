// Unit tests of the strict CSV reader (clients/cli/csv_table.h). Expected values are C++ double
// literals, which the compiler rounds correctly (C++20 [lex.fcon]), so they do not depend on the
// reader under test.
#include "csv_table.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <string>

namespace rimwatch {
namespace {

CsvTable MustParse(const std::string& text) {
  CsvTable table;
  CsvError error;
  EXPECT_TRUE(ParseCsvTable(text, "t.csv", &table, &error)) << error.ToString();
  return table;
}

CsvError MustFail(const std::string& text) {
  CsvTable table;
  CsvError error;
  EXPECT_FALSE(ParseCsvTable(text, "t.csv", &table, &error)) << "parsed:\n" << text;
  return error;
}

TEST(CsvTableTest, ReadsPeriodColumnAndValues) {
  const CsvTable t = MustParse("period,a,b\n1960Q1,1.5,-2\n1960Q2,0.1,3e-2\n");
  EXPECT_TRUE(t.has_period);
  EXPECT_EQ(t.names, (std::vector<std::string>{"a", "b"}));
  EXPECT_EQ(t.periods, (std::vector<std::string>{"1960Q1", "1960Q2"}));
  ASSERT_EQ(t.rows(), 2u);
  ASSERT_EQ(t.cols(), 2u);
  EXPECT_EQ(t.value(0, 0), 1.5);
  EXPECT_EQ(t.value(0, 1), -2.0);
  EXPECT_EQ(t.value(1, 0), 0.1);
  EXPECT_EQ(t.value(1, 1), 3e-2);
  EXPECT_EQ(t.lines, (std::vector<int>{2, 3}));
  EXPECT_EQ(t.header_line, 1);
  EXPECT_EQ(t.PeriodLabel(1), "1960Q2");
}

TEST(CsvTableTest, WithoutPeriodColumnLabelsAreRowNumbers) {
  const CsvTable t = MustParse("x,y,z\n1,2,3\n4,5,6\n7,8,9");  // no final newline
  EXPECT_FALSE(t.has_period);
  EXPECT_TRUE(t.periods.empty());
  EXPECT_EQ(t.names.size(), 3u);
  ASSERT_EQ(t.rows(), 3u);
  EXPECT_EQ(t.value(2, 2), 9.0);
  EXPECT_EQ(t.PeriodLabel(0), "1");
  EXPECT_EQ(t.PeriodLabel(2), "3");
}

TEST(CsvTableTest, CommentsBlankTailCrLfBomAndSpaces) {
  const std::string text =
      "\xEF\xBB\xBF# invented data\r\n"
      "  # an indented comment\r\n"
      "period , a ,\tb\r\n"
      "1, +0.25 , 1E3\r\n"
      "# a comment between rows\r\n"
      "2,-.5,7.\r\n"
      "\r\n"
      "   \n"
      "# trailing comment\n";
  const CsvTable t = MustParse(text);
  EXPECT_TRUE(t.has_period);
  EXPECT_EQ(t.names, (std::vector<std::string>{"a", "b"}));
  EXPECT_EQ(t.header_line, 3);
  ASSERT_EQ(t.rows(), 2u);
  EXPECT_EQ(t.value(0, 0), 0.25);
  EXPECT_EQ(t.value(0, 1), 1000.0);
  EXPECT_EQ(t.value(1, 0), -0.5);
  EXPECT_EQ(t.value(1, 1), 7.0);
  EXPECT_EQ(t.lines, (std::vector<int>{4, 6}));
  EXPECT_EQ(t.last_line, 9);
}

TEST(CsvTableTest, NumbersAreCorrectlyRounded) {
  // Decimal strings whose nearest double differs from a naive digit-by-digit accumulation.
  const CsvTable t =
      MustParse("a,b,c\n0.30000000000000004,2.2250738585072014e-308,1.7976931348623157e308\n");
  EXPECT_EQ(t.value(0, 0), 0.30000000000000004);
  EXPECT_EQ(t.value(0, 1), 2.2250738585072014e-308);
  EXPECT_EQ(t.value(0, 2), 1.7976931348623157e308);
}

struct BadCase {
  const char* label;
  const char* text;
  int line;
  const char* what;  // a fragment of the message
};

void PrintTo(const BadCase& c, std::ostream* os) { *os << c.label; }

class CsvTableBadInputTest : public ::testing::TestWithParam<BadCase> {};

TEST_P(CsvTableBadInputTest, NamesLineAndProblem) {
  const BadCase& c = GetParam();
  const CsvError e = MustFail(c.text);
  EXPECT_EQ(e.path, "t.csv");
  EXPECT_EQ(e.line, c.line) << e.ToString();
  EXPECT_NE(e.what.find(c.what), std::string::npos) << e.ToString();
  EXPECT_EQ(e.ToString(), "t.csv:" + std::to_string(c.line) + ": " + e.what);
}

INSTANTIATE_TEST_SUITE_P(
    Cases, CsvTableBadInputTest,
    ::testing::Values(
        BadCase{"empty", "", 1, "empty file"},
        BadCase{"only_comments", "# nothing\n\n", 2, "no header"},
        BadCase{"header_is_numbers", "1,2\n3,4\n", 1, "missing header"},
        BadCase{"no_rows", "a,b\n", 1, "no observations"},
        BadCase{"no_rows_comment_after", "a,b\n# c\n", 2, "no observations"},
        BadCase{"too_few_fields", "a,b\n1,2\n3\n", 3, "ragged line: 1 fields"},
        BadCase{"too_many_fields", "a,b\n1,2,3\n", 2, "ragged line: 3 fields"},
        BadCase{"trailing_comma", "a,b\n1,2,\n", 2, "ragged line: 3 fields"},
        BadCase{"word", "a,b\n1,x\n", 2, "column 'b': 'x' is not a decimal number"},
        BadCase{"two_points", "a\n1.2.3\n", 2, "not a decimal number"},
        BadCase{"bare_exponent", "a\n1e\n", 2, "not a decimal number"},
        BadCase{"hex", "a\n0x10\n", 2, "not a decimal number"},
        BadCase{"double_sign", "a\n+-1\n", 2, "not a decimal number"},
        BadCase{"minus_minus", "a\n--1\n", 2, "not a decimal number"},
        BadCase{"inner_space", "a\n1 2\n", 2, "not a decimal number"},
        BadCase{"nan", "a,b\n1,nan\n", 2, "'nan'"}, BadCase{"inf", "a,b\n1,-inf\n", 2, "'-inf'"},
        BadCase{"overflow", "a\n1e999\n", 2, "out of the range"},
        BadCase{"empty_value", "a,b\n1,\n", 2, "column 'b': empty value"},
        BadCase{"empty_period", "period,a\n,1\n", 2, "empty period label"},
        BadCase{"duplicate", "a,b,a\n1,2,3\n", 1, "duplicate variable name 'a' (columns 1 and 3)"},
        BadCase{"empty_name", "a,,b\n1,2,3\n", 1, "header column 2 is empty"},
        BadCase{"period_not_first", "a,period\n1,2\n", 1, "period column must be the first"},
        BadCase{"only_period", "period\n1\n", 1, "no variable columns"},
        BadCase{"quoted_header", "\"a\",b\n1,2\n", 1, "quoted fields are not supported"},
        BadCase{"quoted_value", "a,b\n1,\"2\"\n", 2, "quoted fields are not supported"},
        BadCase{"blank_inside", "a\n1\n\n2\n", 3, "blank line between observations"}),
    [](const ::testing::TestParamInfo<BadCase>& p) { return std::string(p.param.label); });

TEST(CsvTableTest, ReadsFileAndReportsMissingFileWithoutLine) {
  const std::string dir = ::testing::TempDir();
  const std::string path = dir + "/csv_table_test_input.csv";
  {
    std::ofstream f(path);
    f << "period,u\n7,1.25\n8,2.5\n";
  }
  CsvTable t;
  CsvError e;
  ASSERT_TRUE(ReadCsvTable(path, &t, &e)) << e.ToString();
  EXPECT_EQ(t.path, path);
  EXPECT_EQ(t.value(1, 0), 2.5);
  std::filesystem::remove(path);

  EXPECT_FALSE(ReadCsvTable(path, &t, &e));
  EXPECT_EQ(e.line, 0);
  EXPECT_EQ(e.ToString().rfind(path + ": cannot open", 0), 0u) << e.ToString();

  EXPECT_FALSE(ReadCsvTable(dir, &t, &e));
  EXPECT_NE(e.ToString().find("is a directory"), std::string::npos) << e.ToString();
}

}  // namespace
}  // namespace rimwatch
