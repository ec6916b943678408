// The command line's small courtesies: usage on a bare call, --threads 0, plain messages for
// malformed coordinates, the column report's time/surface pressure/JSON file list, the run
// summary naming the variables used, and both times when times across files disagree.
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"

namespace latentlift::test::cli {
namespace {

std::string sample() { return std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/aurel_global_5deg.nc"; }

TEST(CliMessages, BareCallPrintsUsageAndExitsTwo) {
  CommandResult r = run_command(binary());
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("analyze"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("climatology"), std::string::npos) << r.output;
}

TEST(CliMessages, ThreadsZeroMeansAllCores) {
  const std::string out = test_scratch() + "/out.nc";
  CommandResult r = run_command(binary() + " analyze " + quote(sample()) + " -o " + quote(out) + " --threads 0");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(CliMessages, ClimatologyThreadsZeroMeansAllCores) {
  const std::string out = test_scratch() + "/stats.nc";
  CommandResult r = run_command(binary() + " climatology " + quote(sample()) + " -o " + quote(out) + " --threads 0");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(CliMessages, LatitudeWithALetterGetsAPlainMessage) {
  CommandResult r = run_command(binary() + " column " + quote(sample()) + " --lat 50N --lon 10");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("--lat 50N: expected a number of degrees north"), std::string::npos) << r.output;
}

TEST(CliMessages, NegativeCoordinatesAreStillNumbers) {
  CommandResult r = run_command(binary() + " column " + quote(sample()) + " --lat -12 --lon -40");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(CliMessages, ColumnReportGivesValidTimeSurfacePressureAndFilesAsAList) {
  CommandResult one = run_command(binary() + " column " + quote(sample()) + " --lat -12 --lon 40 --format json");
  ASSERT_EQ(one.exit_code, 0) << one.output;
  EXPECT_NE(one.output.find("\"files\": [\"" + sample() + "\"]"), std::string::npos) << one.output;
  EXPECT_NE(one.output.find("\"valid_time\": \""), std::string::npos) << one.output;
  EXPECT_NE(one.output.find("\"surface_pressure_source\": \""), std::string::npos) << one.output;
  CommandResult table = run_command(binary() + " column " + quote(sample()) + " --lat -12 --lon 40");
  EXPECT_NE(table.output.find("valid time "), std::string::npos) << table.output;
  EXPECT_NE(table.output.find("surface pressure "), std::string::npos) << table.output;
}

TEST(CliMessages, RunSummaryNamesTheVariablesUsedAndTheSurfacePressureSource) {
  const std::string out = test_scratch() + "/out.nc";
  CommandResult r = run_command(binary() + " analyze " + quote(sample()) + " -o " + quote(out));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("air_temperature: '"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("surface pressure: "), std::string::npos) << r.output;
  NcFile f(out);
  EXPECT_FALSE(f.text_att("", "surface_pressure_source").empty());
}

TEST(CliMessages, MisspeltFieldListsTheFieldsClosestFirst) {
  const std::string dir = test_scratch();
  ASSERT_EQ(run_command(binary() + " analyze " + quote(sample()) + " -o " + quote(dir + "/out.nc") + " --quiet").exit_code,
            0);
  CommandResult r = run_command(binary() + " quicklook " + quote(dir + "/out.nc") + " --field mu_cap -o " +
                                quote(dir + "/map.png"));
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("the file has mu_cape, "), std::string::npos) << r.output;
}

}  // namespace
}  // namespace latentlift::test::cli
