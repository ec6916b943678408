// End to end: bad input makes `latentlift analyze` exit 2 with one message that names the
// problem, and leaves no output file (not even a temporary one) behind.
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"

namespace latentlift::test::cli {
namespace {

struct Failure {
  CommandResult result;
  std::vector<std::string> left_in_output_dir;
};

// Analyse the given error_* inputs into an empty folder of its own.
Failure analyze_bad(const std::vector<std::string>& inputs) {
  std::string dir = test_scratch();
  make_shapes(dir, "errors");
  std::string out_dir = dir + "/out";
  std::filesystem::create_directories(out_dir);
  std::string cmd = binary() + " analyze";
  for (const auto& in : inputs) cmd += " " + quote(dir + "/" + in);
  cmd += " -o " + quote(out_dir + "/result.nc") + " --quiet";
  Failure f{run_command(cmd), {}};
  f.left_in_output_dir = files_in(out_dir);
  return f;
}

TEST(AnalyzeErrors, MissingTemperatureExitsTwoAndSaysWhatWasLookedFor) {
  Failure f = analyze_bad({"error_missing_temperature.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_missing_temperature.nc")) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "air_temperature")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, WrongTemperatureUnitsExitTwoAndNameVariableAndUnits) {
  Failure f = analyze_bad({"error_wrong_units.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_wrong_units.nc")) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "'t'")) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "m s-1")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, NoPressureDimensionExitsTwoAndSaysPressure) {
  Failure f = analyze_bad({"error_no_pressure_dimension.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_no_pressure_dimension.nc")) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "pressure")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, TruncatedFileExitsTwoAndNamesFile) {
  Failure f = analyze_bad({"error_truncated.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_truncated.nc")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, NonNetcdfFileExitsTwoAndNamesFile) {
  Failure f = analyze_bad({"error_not_netcdf.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_not_netcdf.nc")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, MismatchedGridsAcrossFilesExitTwoAndNameAFile) {
  Failure f = analyze_bad({"error_grid_levels.nc", "error_grid_surface.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_grid_surface.nc") ||
              contains_nocase(f.result.output, "error_grid_levels.nc"))
      << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, AllMissingDataExitsTwoAndSaysMissing) {
  Failure f = analyze_bad({"error_all_missing.nc"});
  EXPECT_EQ(f.result.exit_code, 2) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "error_all_missing.nc")) << f.result.output;
  EXPECT_TRUE(contains_nocase(f.result.output, "missing")) << f.result.output;
  EXPECT_TRUE(f.left_in_output_dir.empty());
}

TEST(AnalyzeErrors, ErrorIsOneLine) {
  Failure f = analyze_bad({"error_missing_temperature.nc"});
  std::string text = f.result.output;
  while (!text.empty() && text.back() == '\n') text.pop_back();
  EXPECT_EQ(text.find('\n'), std::string::npos) << f.result.output;
}

TEST(AnalyzeErrors, ExistingOutputIsNotOverwrittenWithoutOverwrite) {
  std::string dir = test_scratch();
  make_shapes(dir, "plain_latlon");
  std::string in = quote(dir + "/plain_latlon.nc"), out = dir + "/out.nc";
  ASSERT_EQ(run_command(binary() + " analyze " + in + " -o " + quote(out) + " --quiet").exit_code, 0);
  auto size = std::filesystem::file_size(out);
  CommandResult again = run_command(binary() + " analyze " + in + " -o " + quote(out) + " --quiet");
  EXPECT_EQ(again.exit_code, 2) << again.output;
  EXPECT_EQ(std::filesystem::file_size(out), size);
  EXPECT_EQ(run_command(binary() + " analyze " + in + " -o " + quote(out) + " --overwrite --quiet").exit_code, 0);
}

}  // namespace
}  // namespace latentlift::test::cli
