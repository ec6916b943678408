// End to end: `latentlift analyze` on inputs in every supported shape gives, in every
// column, what the column kernel gives when run directly on that column's values.
// The inputs come from make_shapes.py; expected_<shape>.nc holds the values a correct
// reader hands to the kernel (unpacked in double precision, converted to SI by the
// unit definitions of UDUNITS-2: degC = K - 273.15, g/kg = 1e-3 kg/kg, percent = 1e-2,
// geopotential / standard gravity 9.80665 m s-2 (CGPM 1901) = geopotential height).
#include <algorithm>
#include <cmath>
#include <map>
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"

namespace latentlift::test::cli {
namespace {

struct OutputField {
  const char* name;
  double (*get)(const ColumnResult&);
  double scale;  // result unit -> output unit (Pa -> hPa)
};

const OutputField kFields[] = {
    {"latent_layer_depth", [](const ColumnResult& r) { return r.latent_layer_depth_pa; }, 0.01},
    {"latent_layer_depth_z", [](const ColumnResult& r) { return r.latent_layer_depth_z_m; }, 1.0},
    {"latent_layer_bottom", [](const ColumnResult& r) { return r.latent_layer_bottom_pa; }, 0.01},
    {"latent_layer_top", [](const ColumnResult& r) { return r.latent_layer_top_pa; }, 0.01},
    {"tangent_theta_w", [](const ColumnResult& r) { return r.tangent_theta_w_k; }, 1.0},
    {"tangent_pressure", [](const ColumnResult& r) { return r.tangent_pressure_pa; }, 0.01},
    {"mu_pressure", [](const ColumnResult& r) { return r.mu_pressure_pa; }, 0.01},
    {"mu_theta_w", [](const ColumnResult& r) { return r.mu_theta_w_k; }, 1.0},
    {"mu_cape", [](const ColumnResult& r) { return r.mu_cape_j_kg; }, 1.0},
    {"mu_cin", [](const ColumnResult& r) { return r.mu_cin_j_kg; }, 1.0},
    {"mu_lfc_pressure", [](const ColumnResult& r) { return r.mu_lfc_pressure_pa; }, 0.01},
    {"mu_el_pressure", [](const ColumnResult& r) { return r.mu_el_pressure_pa; }, 0.01},
    {"mu_lift_to_lfc", [](const ColumnResult& r) { return r.mu_lift_to_lfc_pa; }, 0.01},
    {"mu_lift_to_lfc_z", [](const ColumnResult& r) { return r.mu_lift_to_lfc_z_m; }, 1.0},
    {"easiest_lift", [](const ColumnResult& r) { return r.easiest_lift_pa; }, 0.01},
    {"easiest_lift_pressure", [](const ColumnResult& r) { return r.easiest_lift_pressure_pa; }, 0.01},
    {"latent_class",
     [](const ColumnResult& r) { return r.latent_class == kByteMissing ? std::nan("") : double(r.latent_class); }, 1.0},
};

struct ShapeRun {
  ExpectedColumns expected;
  std::vector<ColumnResult> kernel;
  std::string output;
};

// Generate one shape, analyse it with the CLI (default config, no flags), run the kernel on its columns.
ShapeRun run_shape(const std::string& shape) {
  std::string dir = test_scratch();
  make_shapes(dir, shape);
  ShapeRun run;
  run.output = dir + "/out.nc";
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/" + shape + ".nc") + " -o " + quote(run.output) + " --quiet");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  run.expected = read_expected(dir + "/expected_" + shape + ".nc");
  AnalysisSettings settings;  // the defaults of DESIGN.md: virtual buoyancy, top 100 hPa, source layer 300 hPa, 0.01 K
  ColumnAnalyzer analyzer(settings);
  run.kernel.resize(run.expected.n_columns);
  for (int c = 0; c < run.expected.n_columns; ++c) analyzer.analyze(run.expected.column(c), run.kernel[c]);
  return run;
}

// Every output field equals the kernel's value in every column; float32 output: relative 2e-5.
void expect_matches_kernel(const ShapeRun& run) {
  if (::testing::Test::HasFailure()) return;
  NcFile out(run.output);
  for (const OutputField& f : kFields) {
    ASSERT_TRUE(out.has_var(f.name)) << "output lacks " << f.name;
    Field field = read_field(out, f.name);
    int mismatches = 0;
    for (int c = 0; c < run.expected.n_columns; ++c) {
      double want = f.get(run.kernel[c]) * f.scale;
      double got = field.values[run.expected.where(field, c)];
      bool ok = std::isnan(want) ? std::isnan(got) : std::fabs(got - want) <= 2e-5 * std::fabs(want) + 1e-3;
      if (!ok && ++mismatches <= 3)
        ADD_FAILURE() << f.name << " column " << c << ": output " << got << ", kernel " << want;
    }
    EXPECT_EQ(mismatches, 0) << f.name;
  }
}

// The generated state holds latently unstable columns and stable ones (else the comparison proves little).
void expect_both_kinds_of_column(const ShapeRun& run) {
  int none = 0, latent = 0;
  for (const ColumnResult& r : run.kernel) {
    if (r.latent_class == 0) ++none;
    if (r.latent_class == 2) ++latent;
  }
  EXPECT_GT(none, 0);
  EXPECT_GT(latent, 0);
}

TEST(AnalyzeShapes, PlainLatLonFloatMatchesKernel) {
  ShapeRun run = run_shape("plain_latlon");
  expect_both_kinds_of_column(run);
  expect_matches_kernel(run);
}

TEST(AnalyzeShapes, PackedInt16WithScaleAndOffsetMatchesKernel) { expect_matches_kernel(run_shape("packed_int16")); }

TEST(AnalyzeShapes, PressureInPaAscendingWithGeopotentialMatchesKernel) { expect_matches_kernel(run_shape("pa_ascending")); }

TEST(AnalyzeShapes, CelsiusAndRelativeHumidityPercentMatchKernel) { expect_matches_kernel(run_shape("degc_relative_humidity")); }

TEST(AnalyzeShapes, DewPointMatchesKernel) { expect_matches_kernel(run_shape("dew_point")); }

TEST(AnalyzeShapes, MixingRatioInGramsPerKilogramMatchesKernel) { expect_matches_kernel(run_shape("mixing_ratio_gkg")); }

TEST(AnalyzeShapes, UnstructuredCellsMatchKernel) { expect_matches_kernel(run_shape("unstructured_cells")); }

TEST(AnalyzeShapes, NoTimeDimensionMatchesKernel) { expect_matches_kernel(run_shape("no_time")); }

TEST(AnalyzeShapes, AnyDimensionOrderMatchesKernel) { expect_matches_kernel(run_shape("dimension_order")); }

TEST(AnalyzeShapes, LevelCoordinateInMillibarsWithoutAxisAttributesMatchesKernel) {
  expect_matches_kernel(run_shape("millibars_level"));
}

TEST(AnalyzeShapes, ProjectedLambertGridMatchesKernel) { expect_matches_kernel(run_shape("projected_lcc")); }

TEST(AnalyzeShapes, BelowGroundLevelsMarkedByFillValuesMatchKernel) {
  ShapeRun run = run_shape("below_ground_fill");
  expect_matches_kernel(run);
}

// Plateau columns: levels below the surface pressure (extrapolated values present) are not used.
TEST(AnalyzeShapes, BelowGroundLevelsMarkedBySurfacePressureAreNotSources) {
  ShapeRun run = run_shape("plain_latlon");
  ASSERT_FALSE(::testing::Test::HasFailure());
  NcFile out(run.output);
  Field mu = read_field(out, "mu_pressure");
  Field tangent = read_field(out, "tangent_pressure");
  int plateau = 0;
  for (int c = 0; c < run.expected.n_columns; ++c) {
    double sp_hpa = run.expected.surface_pressure_pa[c] / 100.0;
    if (sp_hpa > 900.0) continue;
    ++plateau;
    EXPECT_LE(mu.values[run.expected.where(mu, c)], sp_hpa) << "column " << c;
    EXPECT_LE(tangent.values[run.expected.where(tangent, c)], sp_hpa) << "column " << c;
  }
  EXPECT_GT(plateau, 0);
  expect_matches_kernel(run);
}

struct LevelField {
  const char* name;
  double (*get)(const LevelFields&, int level);
};

const LevelField kLevelFields[] = {
    {"wet_bulb_temperature", [](const LevelFields& l, int k) { return l.wet_bulb_temperature_k[k]; }},
    {"wet_bulb_potential_temperature", [](const LevelFields& l, int k) { return l.wet_bulb_potential_temperature_k[k]; }},
    {"saturation_theta_w", [](const LevelFields& l, int k) { return l.saturation_theta_w_k[k]; }},
    {"max_parcel_excess", [](const LevelFields& l, int k) { return l.max_parcel_excess_k[k]; }},
    {"latent_flag", [](const LevelFields& l, int k) { return l.latent_flag[k] < 0 ? std::nan("") : double(l.latent_flag[k]); }},
    {"stability_class",
     [](const LevelFields& l, int k) { return l.stability_class[k] < 0 ? std::nan("") : double(l.stability_class[k]); }},
    {"potential_instability",
     [](const LevelFields& l, int k) { return l.potential_instability[k] < 0 ? std::nan("") : double(l.potential_instability[k]); }},
};

// --level-fields on Pa-ascending input: every level field matches the kernel's at the level of the same pressure.
TEST(AnalyzeShapes, LevelFieldsMatchKernelAtTheSamePressure) {
  std::string dir = test_scratch();
  make_shapes(dir, "pa_ascending");
  std::string out_path = dir + "/out.nc";
  CommandResult r = run_command(binary() + " analyze " + quote(dir + "/pa_ascending.nc") + " -o " + quote(out_path) +
                                " --level-fields --quiet");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  ExpectedColumns expected = read_expected(dir + "/expected_pa_ascending.nc");
  AnalysisSettings settings;
  settings.level_fields = true;
  ColumnAnalyzer analyzer(settings);
  std::vector<ColumnResult> kernel(expected.n_columns);
  for (int c = 0; c < expected.n_columns; ++c) analyzer.analyze(expected.column(c), kernel[c]);

  NcFile out(out_path);
  for (const LevelField& f : kLevelFields) {
    ASSERT_TRUE(out.has_var(f.name)) << f.name;
    Field field = read_field(out, f.name);
    // the vertical dimension of the output, and its pressure coordinate in Pa
    int vdim = -1;
    for (size_t d = 0; d < field.dims.size(); ++d)
      if (std::find(expected.index_dims.begin(), expected.index_dims.end(), field.dims[d]) == expected.index_dims.end()) vdim = int(d);
    ASSERT_GE(vdim, 0) << f.name;
    Field pressure = read_field(out, field.dims[vdim]);
    std::string units = out.text_att(field.dims[vdim], "units");
    double to_pa = (units == "Pa") ? 1.0 : 100.0;
    ASSERT_EQ(int(pressure.size()), expected.n_levels);
    int mismatches = 0;
    for (int c = 0; c < expected.n_columns; ++c) {
      for (size_t kout = 0; kout < pressure.size(); ++kout) {
        int k = -1;
        for (int kin = 0; kin < expected.n_levels; ++kin)
          if (std::fabs(expected.pressure_pa[kin] - pressure.values[kout] * to_pa) < 0.5) k = kin;
        ASSERT_GE(k, 0) << "output level " << pressure.values[kout] << " " << units << " is not an input level";
        // position of (column c, output level kout) in the field
        std::vector<size_t> idx;
        for (size_t d = 0; d < field.dims.size(); ++d) {
          if (int(d) == vdim) { idx.push_back(kout); continue; }
          auto it = std::find(expected.index_dims.begin(), expected.index_dims.end(), field.dims[d]);
          idx.push_back(it != expected.index_dims.end() ? expected.index[it - expected.index_dims.begin()][c] : 0);
        }
        double got = field.values[field.flat(idx)];
        double want = f.get(kernel[c].levels, k);
        bool ok = std::isnan(want) ? std::isnan(got) : std::fabs(got - want) <= 2e-5 * std::fabs(want) + 1e-3;
        if (!ok && ++mismatches <= 3)
          ADD_FAILURE() << f.name << " column " << c << " at " << expected.pressure_pa[k] << " Pa: output " << got
                        << ", kernel " << want;
      }
    }
    EXPECT_EQ(mismatches, 0) << f.name;
  }
}

}  // namespace
}  // namespace latentlift::test::cli
