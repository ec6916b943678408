// End to end: `latentlift analyze` on inputs in every supported shape gives, in every
// column, what the column kernel gives when run directly on that column's values.
// The inputs come from make_shapes.py; expected_<shape>.nc holds the values a correct
// reader hands to the kernel (unpacked in double precision, converted to SI by the
// unit definitions of UDUNITS-2: degC = K - 273.15, g/kg = 1e-3 kg/kg, percent = 1e-2,
// geopotential / standard gravity 9.80665 m s-2 (CGPM 1901) = geopotential height).
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

}  // namespace
}  // namespace latentlift::test::cli
