// End to end: damaged or implausible input makes every subcommand exit 2 with one line that
// names the input file (no library diagnostics on stderr), never a crash or exit 0/1.
#include <fstream>
#include <iterator>
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"
#include "io/nc_builder.hpp"

namespace latentlift::test::cli {
namespace {

std::vector<Var> small_grid_vars(int deflate_level = 0) {
  SmallGrid grid;
  std::vector<Var> vars = grid.standard();
  vars[6] = grid.var("height", "geopotential_height", "m", SmallGrid::hypsometric_z_m);
  for (std::size_t v = 4; v < 7; ++v) vars[v].deflate_level = deflate_level;
  return vars;
}

std::size_t count_lines(const std::string& text) {
  std::size_t lines = 0;
  for (char c : text) lines += c == '\n';
  return lines;
}

TEST(DamagedInput, ADamagedNetcdf4FileExitsTwoWithOneLineAndNoLibraryDiagnostics) {
  const std::string dir = test_scratch();
  SmallGrid grid;
  write_nc(dir + "/good.nc", grid.dims, small_grid_vars(1));
  std::ifstream in(dir + "/good.nc", std::ios::binary);
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  for (std::size_t k = bytes.size() / 3; k < bytes.size() / 3 + 512 && k < bytes.size(); ++k) bytes[k] = '\0';
  std::ofstream(dir + "/damaged.nc", std::ios::binary) << bytes;
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/damaged.nc") + " -o " + quote(dir + "/out.nc") + " --quiet");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_EQ(count_lines(r.output), 1u) << r.output;
  EXPECT_TRUE(contains_nocase(r.output, "damaged.nc")) << r.output;
  EXPECT_FALSE(contains_nocase(r.output, "HDF5-DIAG")) << r.output;
  EXPECT_EQ(files_in(dir), (std::vector<std::string>{"damaged.nc", "good.nc"}));
}

TEST(DamagedInput, AnEmptyFileExitsTwoNamingIt) {
  const std::string dir = test_scratch();
  std::ofstream(dir + "/empty.nc").flush();
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/empty.nc") + " -o " + quote(dir + "/out.nc") + " --quiet");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_TRUE(contains_nocase(r.output, "empty.nc: expected a NetCDF file, found an empty file")) << r.output;
}

TEST(DamagedInput, KelvinLabelledCelsiusExitsTwoBeforeAnyOutputIsWritten) {
  const std::string dir = test_scratch();
  SmallGrid grid;
  std::vector<Var> vars = small_grid_vars();
  vars[4] = grid.var("temp", "air_temperature", "degC", SmallGrid::temp_k);
  write_nc(dir + "/in.nc", grid.dims, vars);
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/in.nc") + " -o " + quote(dir + "/out.nc") + " --quiet");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_TRUE(contains_nocase(r.output, "the values look like kelvin")) << r.output;
  EXPECT_EQ(files_in(dir), (std::vector<std::string>{"in.nc"}));
}

TEST(DamagedInput, ColumnOnAZeroLengthDimensionExitsTwo) {
  const std::string dir = test_scratch();
  SmallGrid grid;
  Dims dims = {{"time", 2}, {"level", 4}, {"lat", 3}, {"lon", 0}};
  std::vector<Var> vars = small_grid_vars();
  vars[3].data.clear();
  for (std::size_t v = 4; v < 7; ++v) vars[v].data.clear();
  write_nc(dir + "/in.nc", dims, vars);
  CommandResult r = run_command(binary() + " column " + quote(dir + "/in.nc") + " --lat 10 --lon 20");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_TRUE(contains_nocase(r.output, "dimension 'lon' has length 0")) << r.output;
}

TEST(DamagedInput, AnalyzeWithNoAnalysableColumnExitsTwoAndLeavesNoFile) {
  const std::string dir = test_scratch();
  SmallGrid grid;
  std::vector<Var> vars = small_grid_vars();
  const double fill = 9.96921e36;  // netCDF default float fill (netcdf.h NC_FILL_FLOAT)
  vars[4] = grid.var("temp", "air_temperature", "K", [&](const Index& i) { return i.at("level") < 2 ? SmallGrid::temp_k(i) : fill; });
  write_nc(dir + "/in.nc", grid.dims, vars);
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/in.nc") + " -o " + quote(dir + "/out.nc") + " --quiet");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_TRUE(contains_nocase(r.output, "none of 24 columns was")) << r.output;
  EXPECT_EQ(files_in(dir), (std::vector<std::string>{"in.nc"}));
}

}  // namespace
}  // namespace latentlift::test::cli
