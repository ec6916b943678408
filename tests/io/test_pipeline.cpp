// The pipeline: every column goes through the kernel unchanged, results do not depend on
// the thread count or the block size, the file holds what the in-memory API returns, and
// an all-missing input leaves no output file.
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <filesystem>

#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/parallel.hpp"
#include "latentlift/pipeline.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Index;
using test::SmallGrid;

/// A grid with columns that differ (moist and dry, warm and cool) so the kernel's outputs vary.
class Pipeline : public ::testing::Test {
 protected:
  void SetUp() override {
    SmallGrid g;
    g.dims = {{"time", 2}, {"level", 6}, {"lat", 5}, {"lon", 7}};
    g.levels_hpa = {1000, 925, 850, 700, 500, 300};
    std::vector<test::Var> vars = g.coordinates();
    vars[0].data = {0, 6};
    vars[2].data = {0, 1, 2, 3, 4};
    vars[3].data = {0, 1, 2, 3, 4, 5, 6};
    const double p[] = {1000, 925, 850, 700, 500, 300};
    auto temp = [&](const Index& i) {
      double surface = 288.0 + 2.5 * i.at("lon") + 0.7 * i.at("time");
      return surface * std::pow(p[i.at("level")] / 1000.0, 0.19 + 0.01 * i.at("lat"));
    };
    auto rh = [&](const Index& i) { return 30.0 + 12.0 * i.at("lat") + 3.0 * i.at("lon") - 5.0 * i.at("level"); };
    auto z = [&](const Index& i) { return 44330.0 * (1.0 - std::pow(p[i.at("level")] / 1013.25, 0.1903)); };
    vars.push_back(g.var("t", "air_temperature", "K", temp));
    vars.push_back(g.var("r", "relative_humidity", "%", rh));
    vars.push_back(g.var("gh", "geopotential_height", "m", z));
    test::write_nc(input_path, g.dims, vars);
    for (std::size_t v = 4; v < 7; ++v) {  // the same values deflated, one chunk per level map
      vars[v].chunks = {1, 1, 5, 7};
      vars[v].deflate_level = 1;
    }
    test::write_nc(deflated_path, g.dims, vars);
    config = load_config("", {});
  }
  std::vector<FieldSet> in_memory(int threads, std::size_t block_columns, const std::string& path = "") {
    PipelineOptions options;
    options.config = config;
    options.config.block_columns = block_columns;
    options.threads = threads;
    InputDataset input({path.empty() ? input_path : path}, config.aliases);
    std::vector<FieldSet> out;
    analyze_in_memory(input, options, [&](std::size_t, const FieldSet& f) { out.push_back(f); });
    return out;
  }
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string input_path = dir + "/in.nc";
  std::string deflated_path = dir + "/in_deflated.nc";  // read by chunk_reader, steps decoded ahead
  RunConfig config;
};

TEST_F(Pipeline, HandsEveryColumnToTheKernelUnchanged) {
  std::vector<FieldSet> fields = in_memory(2, 8);
  ASSERT_EQ(fields.size(), 2u);
  InputDataset input({input_path}, config.aliases);
  ColumnBlock block;
  for (std::size_t c : {0u, 17u, 34u}) {
    input.read_block(1, {c, 1}, block);
    ColumnInput column;
    column.n_levels = block.n_levels;
    column.pressure_pa = input.grid().pressure_pa.data();
    column.temp_k = block.temp_k.data();
    column.humidity = block.humidity.data();
    column.humidity_kind = block.humidity_kind;
    column.height_m = block.height_m.data();
    ColumnResult direct = analyze_column(column, config.analysis);
    EXPECT_EQ(fields[1].real.at("mu_cape")[c], static_cast<float>(direct.mu_cape_j_kg)) << c;
    EXPECT_EQ(fields[1].real.at("mu_pressure")[c], static_cast<float>(direct.mu_pressure_pa * 0.01)) << c;  // hPa
    EXPECT_EQ(fields[1].byte.at("latent_class")[c], direct.latent_class) << c;
  }
}

bool same_bits(const std::vector<FieldSet>& a, const std::vector<FieldSet>& b) {
  if (a.size() != b.size()) return false;
  for (std::size_t s = 0; s < a.size(); ++s) {
    for (const auto& [name, values] : a[s].real)
      if (std::memcmp(values.data(), b[s].real.at(name).data(), values.size() * sizeof(float)) != 0) return false;
    if (a[s].byte.at("latent_class") != b[s].byte.at("latent_class")) return false;
    if (a[s].qc.columns_analysed != b[s].qc.columns_analysed || a[s].qc.humidity_clipped != b[s].qc.humidity_clipped)
      return false;
  }
  return true;
}

TEST_F(Pipeline, ResultsAreBitwiseIndependentOfThreadCountAndBlockSize) {
  std::vector<FieldSet> one = in_memory(1, 1000);
  EXPECT_TRUE(same_bits(one, in_memory(2, 1000)));
  EXPECT_TRUE(same_bits(one, in_memory(2, 3)));
  EXPECT_TRUE(same_bits(one, in_memory(1, 7)));
}

TEST_F(Pipeline, DeflatedInputDecodedAheadGivesBitwiseTheResultsOfUncompressedInput) {
  std::vector<FieldSet> plain = in_memory(1, 1000);
  EXPECT_TRUE(same_bits(plain, in_memory(1, 1000, deflated_path)));
  EXPECT_TRUE(same_bits(plain, in_memory(2, 3, deflated_path)));
}

TEST_F(Pipeline, TheFileHoldsWhatTheInMemoryApiReturns) {
  std::vector<FieldSet> fields = in_memory(2, 1000);
  PipelineOptions options;
  options.config = config;
  options.level_fields = true;
  options.config.block_columns = 14;  // two rows of 7
  InputDataset input({input_path}, config.aliases);
  RunSummary summary = analyze_to_file(input, dir + "/out.nc", options, {});
  EXPECT_EQ(summary.columns, 70u);
  EXPECT_EQ(summary.qc.columns_analysed + summary.qc.columns_skipped, 70);
  int ncid = -1, var = -1;
  ASSERT_EQ(nc_open((dir + "/out.nc").c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_inq_varid(ncid, "latent_layer_depth", &var), NC_NOERR);
  std::vector<float> depth(70);
  nc_get_var_float(ncid, var, depth.data());
  for (std::size_t c = 0; c < 35; ++c) {
    float expected = fields[1].real.at("latent_layer_depth")[c];
    if (std::isnan(expected))
      EXPECT_GT(depth[35 + c], 1e36f);
    else
      EXPECT_EQ(depth[35 + c], expected);
  }
  ASSERT_EQ(nc_inq_varid(ncid, "wet_bulb_temperature", &var), NC_NOERR);
  std::vector<float> tw(2 * 6 * 35);
  nc_get_var_float(ncid, var, tw.data());
  EXPECT_GT(tw[0], 250.0f);  // time 0, 1000 hPa, first column: a plausible wet-bulb temperature, K
  EXPECT_LT(tw[0], 300.0f);
  nc_close(ncid);
}

TEST_F(Pipeline, WritesOnlyTheChosenTimeIndicesToTheFile) {
  std::vector<FieldSet> fields = in_memory(2, 1000);
  PipelineOptions options;
  options.config = config;
  options.time_indices = {1};
  InputDataset input({input_path}, config.aliases);
  RunSummary summary = analyze_to_file(input, dir + "/one.nc", options, {});
  EXPECT_EQ(summary.steps, 1u);
  int ncid = -1, var = -1;
  ASSERT_EQ(nc_open((dir + "/one.nc").c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_inq_varid(ncid, "mu_theta_w", &var), NC_NOERR);
  std::vector<float> theta(35);
  nc_get_var_float(ncid, var, theta.data());
  EXPECT_EQ(theta[20], fields[1].real.at("mu_theta_w")[20]);
  nc_close(ncid);
}

TEST_F(Pipeline, AnalysesOnlyTheChosenTimeIndices) {
  PipelineOptions options;
  options.config = config;
  options.time_indices = {1};
  InputDataset input({input_path}, config.aliases);
  std::vector<std::size_t> steps;
  analyze_in_memory(input, options, [&](std::size_t step, const FieldSet&) { steps.push_back(step); });
  EXPECT_EQ(steps, (std::vector<std::size_t>{1}));
}

TEST_F(Pipeline, AllMissingDataIsAnInputErrorAndLeavesNoFile) {
  SmallGrid g;
  std::vector<test::Var> vars = g.standard();
  vars[4].atts.push_back({"_FillValue", "", {-999.0}});
  for (double& v : vars[4].data) v = -999.0;
  test::write_nc(dir + "/empty.nc", g.dims, vars);
  InputDataset input({dir + "/empty.nc"}, config.aliases);
  PipelineOptions options;
  options.config = config;
  EXPECT_THROW(analyze_to_file(input, dir + "/out.nc", options, {}), InputError);
  for (const auto& entry : std::filesystem::directory_iterator(dir))
    EXPECT_EQ(entry.path().filename().string().find("out.nc"), std::string::npos) << entry.path();
}

}  // namespace
}  // namespace latentlift
