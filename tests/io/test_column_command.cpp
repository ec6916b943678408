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

TEST(ColumnInputs, SurfacePressureFromASecondFileMarksLevelsBelowGround) {
  // Real NCEP GFS output (NOAA/NWS/NCEP, public domain; sample files from the pygrib
  // repository): pressure-level fields in one file, surface pressure in another. Over the
  // high plateau at 30 N 90 E the surface lies near 520 hPa (the file's own sp field), so
  // the levels from 1000 to 550 hPa are below ground and must be reported missing.
  const std::string dir = test::real_data_dir() + "/ncep-nwp-pressure-levels/derived-netcdf/";
  const std::string pl = dir + "gfs_2p5deg_20110110_12z_f120_pl_t_gh_r.nc";
  const std::string sfc = dir + "gfs_2p5deg_20110110_12z_f120_sfc_sp_orog_cape_cin.nc";
  if (!std::ifstream(pl) || !std::ifstream(sfc)) GTEST_SKIP() << "shared real data not found at " << dir;
  test::CommandResult r = run_command(test::binary() + " column " + pl + " " + sfc + " --lat 30 --lon 90 --format csv");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  // CSV rows start with the pressure; the dew point (4th column) is empty below ground.
  EXPECT_NE(r.output.find("\n1000.00,"), std::string::npos) << r.output;
  const std::size_t row_1000 = r.output.find("\n1000.00,");
  const std::string line_1000 = r.output.substr(row_1000 + 1, r.output.find('\n', row_1000 + 1) - row_1000 - 1);
  EXPECT_NE(line_1000.find(",,"), std::string::npos) << "1000 hPa should be below ground: " << line_1000;
  const std::size_t row_500 = r.output.find("\n500.00,");
  ASSERT_NE(row_500, std::string::npos) << r.output;
  const std::string line_500 = r.output.substr(row_500 + 1, r.output.find('\n', row_500 + 1) - row_500 - 1);
  EXPECT_EQ(line_500.find(",,"), std::string::npos) << "500 hPa is above ground: " << line_500;
}

TEST(ColumnInputs, MuParcelRuleFromSetChoosesTheParcel) {
  // Real NCEP GFS output (as above), 57.5 N 40 W, 15 January 2011 12 UTC: a latently
  // unstable layer near the sea surface under warm, dry air at 700 hPa, the top of the
  // source layer. The default rule (largest CAPE of the flagged parcels) takes a low
  // parcel, latently unstable; max_theta_w takes the dry 700 hPa parcel, class none
  // (METHODS "Parcels, free convection and the lift needed").
  const std::string dir = test::real_data_dir() + "/ncep-nwp-pressure-levels/derived-netcdf/";
  const std::string pl = dir + "gfs_2p5deg_20110110_12z_f120_pl_t_gh_r.nc";
  const std::string sfc = dir + "gfs_2p5deg_20110110_12z_f120_sfc_sp_orog_cape_cin.nc";
  if (!std::ifstream(pl) || !std::ifstream(sfc)) GTEST_SKIP() << "shared real data not found at " << dir;
  const std::string cmd = test::binary() + " column " + pl + " " + sfc + " --lat 57.5 --lon -40 --format csv";
  test::CommandResult cape = run_command(cmd);
  ASSERT_EQ(cape.exit_code, 0) << cape.output;
  EXPECT_EQ(cape.output.find("\nmu_pressure,700.00,"), std::string::npos) << cape.output;
  EXPECT_EQ(cape.output.find("\nlatent_class,none,"), std::string::npos) << cape.output;
  test::CommandResult theta = run_command(cmd + " --set analysis.mu_parcel=max_theta_w");
  ASSERT_EQ(theta.exit_code, 0) << theta.output;
  EXPECT_NE(theta.output.find("\nmu_pressure,700.00,"), std::string::npos) << theta.output;
  EXPECT_NE(theta.output.find("\nlatent_class,none,"), std::string::npos) << theta.output;
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
