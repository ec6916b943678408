// End to end: the output of `latentlift analyze` does not depend on the thread count, and
// general-purpose clients read it cleanly: netCDF's ncdump and GDAL's gdalinfo (netCDF driver).
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"

namespace latentlift::test::cli {
namespace {

bool have_tool(const std::string& name) { return run_command("command -v " + name).exit_code == 0; }

// Analyse one generated shape into dir/out_<tag>.nc with extra options; returns the output path.
std::string analyze_shape(const std::string& dir, const std::string& shape, const std::string& tag,
                          const std::string& options) {
  std::string out = dir + "/out_" + tag + ".nc";
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/" + shape + ".nc") + " -o " + quote(out) +
                                " --quiet " + options);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  return out;
}

TEST(AnalyzeOutput, OneAndTwoThreadsGiveBitwiseIdenticalFields) {
  std::string dir = test_scratch();
  make_shapes(dir, "threads");
  std::string one = analyze_shape(dir, "threads", "1", "--threads 1 --level-fields");
  std::string two = analyze_shape(dir, "threads", "2", "--threads 2 --level-fields");
  ASSERT_FALSE(HasFailure());
  NcFile a(one), b(two);
  std::vector<std::string> names = a.var_names();
  EXPECT_EQ(names, b.var_names());
  int compared = 0;
  for (const auto& name : names) {
    EXPECT_TRUE(read_raw(a, name) == read_raw(b, name)) << "variable " << name << " differs";
    ++compared;
  }
  EXPECT_GE(compared, 24);
}

TEST(AnalyzeOutput, SmallBlocksGiveBitwiseIdenticalFields) {
  std::string dir = test_scratch();
  make_shapes(dir, "threads");
  std::string whole = analyze_shape(dir, "threads", "whole", "--threads 2");
  std::string blocks = analyze_shape(dir, "threads", "blocks", "--threads 2 --set run.block_columns=777");
  ASSERT_FALSE(HasFailure());
  NcFile a(whole), b(blocks);
  for (const auto& name : a.var_names())
    EXPECT_TRUE(read_raw(a, name) == read_raw(b, name)) << "variable " << name << " differs";
}

TEST(AnalyzeOutput, TimeStepsSplitAcrossFilesGiveTheSameFieldsAsOneFile) {
  std::string dir = test_scratch();
  make_shapes(dir, "split_time");
  std::string one = analyze_shape(dir, "plain_latlon", "one", "");
  std::string split = dir + "/out_split.nc";
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/split_t0.nc") + " " + quote(dir + "/split_t1.nc") +
                                " -o " + quote(split) + " --quiet");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  NcFile a(one), b(split);
  EXPECT_EQ(a.var_names(), b.var_names());
  for (const auto& name : a.var_names())
    EXPECT_TRUE(read_raw(a, name) == read_raw(b, name)) << "variable " << name << " differs";
}

TEST(AnalyzeOutput, NcdumpReadsHeaderWithEveryFieldAndCfConventions) {
  std::string dir = test_scratch();
  make_shapes(dir, "plain_latlon");
  std::string out = analyze_shape(dir, "plain_latlon", "plain", "");
  CommandResult r = run_command("ncdump -h " + quote(out));
  ASSERT_EQ(r.exit_code, 0) << r.output;
  for (const char* name : {"latent_layer_depth", "mu_cape", "mu_cin", "easiest_lift", "latent_class", "Conventions"})
    EXPECT_NE(r.output.find(name), std::string::npos) << name << "\n" << r.output;
  EXPECT_NE(r.output.find("CF-1.8"), std::string::npos) << r.output;
}

// GDAL reports problems on lines of their own starting "Warning N:" or "ERROR N:".
bool has_gdal_complaint(const std::string& output) {
  size_t start = 0;
  while (start < output.size()) {
    size_t end = output.find('\n', start);
    if (end == std::string::npos) end = output.size();
    std::string line = output.substr(start, end - start);
    if (line.rfind("Warning", 0) == 0 || line.rfind("ERROR", 0) == 0) return true;
    start = end + 1;
  }
  return false;
}

// gdalinfo must open the file and a field without warnings, and know the field's coordinate system.
void expect_gdal_reads_cleanly(const std::string& out, const std::string& field, const std::string& crs_word) {
  CommandResult whole = run_command("gdalinfo " + quote(out));
  EXPECT_EQ(whole.exit_code, 0) << whole.output;
  EXPECT_FALSE(has_gdal_complaint(whole.output)) << whole.output;
  CommandResult sub = run_command("gdalinfo -stats " + quote("NETCDF:\"" + out + "\":" + field));
  EXPECT_EQ(sub.exit_code, 0) << sub.output;
  EXPECT_FALSE(has_gdal_complaint(sub.output)) << sub.output;
  EXPECT_NE(sub.output.find("Coordinate System is:"), std::string::npos) << "no coordinate system\n" << sub.output;
  EXPECT_TRUE(contains_nocase(sub.output, crs_word)) << sub.output;
}

TEST(AnalyzeOutput, GdalinfoReadsLatLonOutputWithoutWarnings) {
  if (!have_tool("gdalinfo")) GTEST_SKIP() << "gdalinfo (Debian gdal-bin) not installed";
  std::string dir = test_scratch();
  make_shapes(dir, "plain_latlon");
  std::string out = analyze_shape(dir, "plain_latlon", "plain", "");
  ASSERT_FALSE(HasFailure());
  expect_gdal_reads_cleanly(out, "mu_cape", "GEOGCRS");
}

TEST(AnalyzeOutput, GdalinfoReadsLambertOutputWithItsProjection) {
  if (!have_tool("gdalinfo")) GTEST_SKIP() << "gdalinfo (Debian gdal-bin) not installed";
  std::string dir = test_scratch();
  make_shapes(dir, "projected_lcc");
  std::string out = analyze_shape(dir, "projected_lcc", "lcc", "");
  ASSERT_FALSE(HasFailure());
  expect_gdal_reads_cleanly(out, "latent_layer_depth", "Lambert");
}

TEST(AnalyzeOutput, ProjectedGridKeepsGridMappingAndCoordinates) {
  std::string dir = test_scratch();
  make_shapes(dir, "projected_lcc");
  std::string out = analyze_shape(dir, "projected_lcc", "lcc", "");
  ASSERT_FALSE(HasFailure());
  NcFile f(out);
  std::string mapping = f.text_att("mu_cape", "grid_mapping");
  ASSERT_FALSE(mapping.empty());
  EXPECT_EQ(f.text_att(mapping, "grid_mapping_name"), "lambert_conformal_conic");
  EXPECT_TRUE(f.has_var("x"));
  EXPECT_TRUE(f.has_var("y"));
  EXPECT_TRUE(f.has_var("lat"));
  EXPECT_TRUE(f.has_var("lon"));
}

TEST(AnalyzeOutput, LevelFieldsCarryOneValuePerLevel) {
  std::string dir = test_scratch();
  make_shapes(dir, "plain_latlon");
  std::string out = analyze_shape(dir, "plain_latlon", "levels", "--level-fields");
  ASSERT_FALSE(HasFailure());
  NcFile f(out);
  for (const char* name : {"wet_bulb_temperature", "wet_bulb_potential_temperature", "saturation_theta_w",
                           "max_parcel_excess", "latent_flag", "stability_class", "potential_instability"}) {
    ASSERT_TRUE(f.has_var(name)) << name;
    Field field = read_field(f, name);
    EXPECT_EQ(field.size(), 2u * 16u * 4u * 5u) << name;
  }
}

TEST(ColumnCommand, PrintsOneColumnOfTheGrid) {
  std::string dir = test_scratch();
  make_shapes(dir, "plain_latlon");
  CommandResult r = run_command(binary() + " column " + quote(dir + "/plain_latlon.nc") + " --lat 30 --lon 20 --format csv");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("mu_cape"), std::string::npos) << r.output;
}

}  // namespace
}  // namespace latentlift::test::cli
