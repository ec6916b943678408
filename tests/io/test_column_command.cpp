// The `column` command's formats and refusals (the executable, on the demo global grid).
#include <gtest/gtest.h>

#include <fstream>

#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::run_command;

const std::string kGrid = std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/aurel_global_5deg.nc";

std::string column(const std::string& options) {
  return test::binary() + " column " + kGrid + " " + options;
}

TEST(ColumnFormats, JsonHasTheLevelsAndTheSummaryValues) {
  std::string dir = test::scratch_dir("column_json");
  test::CommandResult r = run_command(column("--lat -12 --lon 40 --format json") + " > " + dir + "/c.json");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  // Parsed by Python's json module (an independent reader of RFC 8259 JSON).
  test::CommandResult check = run_command(test::python() + " -c \"import json; d = json.load(open('" + dir +
                                          "/c.json')); print(len(d['levels']), 'mu_cape' in d['summary'], "
                                          "d['levels'][0]['pressure_hpa'] >= d['levels'][-1]['pressure_hpa'])\"");
  ASSERT_EQ(check.exit_code, 0) << check.output;
  EXPECT_NE(check.output.find("True True"), std::string::npos) << check.output;
}

TEST(ColumnFormats, CsvStartsWithTheLevelTableHeader) {
  test::CommandResult r = run_command(column("--lat 30 --lon -60 --format csv"));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(r.output.rfind("pressure_hpa,height_m,temperature_k,dew_point_k,", 0), 0u) << r.output;
  EXPECT_NE(r.output.find("\nfield,value,units\n"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("\nmu_cape,"), std::string::npos) << r.output;
}

TEST(ColumnFormats, TableNamesTheChosenColumnAndItsDistance) {
  test::CommandResult r = run_command(column("--lat 0 --lon 0 --time 1"));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(r.output.rfind("column ", 0), 0u) << r.output;
  EXPECT_NE(r.output.find("time index 1"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("latent_class"), std::string::npos) << r.output;
}

TEST(ColumnFormats, UnknownFormatIsBadUsage) {
  test::CommandResult r = run_command(column("--lat 0 --lon 0 --format xml"));
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("--format"), std::string::npos) << r.output;
}

TEST(ColumnFormats, TimeIndexOutsideTheInputIsBadUsage) {
  test::CommandResult r = run_command(column("--lat 0 --lon 0 --time 99"));
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("--time 99"), std::string::npos) << r.output;
}

TEST(ColumnFormats, PointOutsideARegionalGridIsBadUsage) {
  std::string regional = std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/vessaline_coast_lcc.nc";
  test::CommandResult r = run_command(test::binary() + " column " + regional + " --lat -45 --lon 10");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("outside the grid"), std::string::npos) << r.output;
}

}  // namespace
}  // namespace latentlift
