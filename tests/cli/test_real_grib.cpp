// End to end on real GRIB files as centres deliver them (../shared/real-data): NCEP GFS 2.5 degree
// and Eta 80 km Lambert (GRIB2), ECMWF IFS 10 degree (GRIB1). Each is analysed directly and
// compared with the analysis of its NetCDF conversion by Debian's cdo and ecCodes'
// grib_to_netcdf (run here); the Eta grid is checked against PROJ's cs2cs; surface pressure
// derived from orography against the model's own surface pressure.
//
// Data credit: NCEP GFS / Eta model output (NOAA/NWS/NCEP, public domain; sample files from the
// pygrib repository); ECMWF IFS forecasts (redistributed under Apache-2.0 in earthkit-data).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "cli/cli_support.hpp"
#include "latentlift/netcdf_io.hpp"

namespace latentlift::test::cli {
namespace {

namespace fs = std::filesystem;

std::string ncep(const std::string& name) { return real_data_dir() + "/ncep-nwp-pressure-levels/" + name; }
std::string ifs() { return real_data_dir() + "/ecmwf-ifs-pl-sample/pl_regular_ll.grib"; }
const char* kGfs = "gfs_2p5deg_20110110_12z_f120.grib2";
const char* kEta = "eta_grid211_80km_20041208_12z_f024.grib2";

bool have(const std::string& path, const char* tool) {
  if (!fs::exists(path)) return false;
  return run_command(std::string("command -v ") + tool + " >/dev/null").exit_code == 0;
}

CommandResult analyze(const std::string& inputs, const std::string& out, const std::string& extra = "") {
  return run_command(binary() + " analyze " + inputs + " -o " + quote(out) + " " + extra);
}

/// Largest |a - b| over the values defined in both, and how many are defined in one only.
struct Difference {
  double max_abs = 0;
  size_t one_sided = 0;
};
Difference compare(const Field& a, const Field& b) {
  Difference d;
  for (size_t k = 0; k < a.size() && k < b.size(); ++k) {
    const bool na = std::isnan(a.values[k]), nb = std::isnan(b.values[k]);
    if (na != nb) ++d.one_sided;
    if (!na && !nb) d.max_abs = std::max(d.max_abs, std::abs(a.values[k] - b.values[k]));
  }
  return d;
}

/// Both outputs hold the same fields on the same grid, to float rounding of the inputs.
void expect_same_analysis(const std::string& a, const std::string& b) {
  NcFile fa(a), fb(b);
  for (const char* name : {"mu_cape", "tangent_theta_w", "mu_pressure", "latent_class", "latent_layer_depth"}) {
    Field x = read_field(fa, name), y = read_field(fb, name);
    ASSERT_EQ(x.lens, y.lens) << name;
    Difference d = compare(x, y);
    EXPECT_EQ(d.one_sided, 0u) << name;
    // float rounding of the inputs moves a result by far less than these (K, hPa, J/kg)
    EXPECT_LT(d.max_abs, std::string(name) == "mu_cape" ? 0.5 : 0.01) << name;
  }
}

TEST(RealGrib, GfsGrib2AnalysedDirectlyAgreesWithItsCdoConversionAnalysedWithoutFlags) {
  const std::string grib = ncep(kGfs);
  if (!have(grib, "cdo")) GTEST_SKIP() << "real data or cdo missing";
  const std::string dir = test_scratch();
  CommandResult direct = analyze(quote(grib), dir + "/direct.nc");
  ASSERT_EQ(direct.exit_code, 0) << direct.output;
  ASSERT_EQ(run_command("cdo -s -f nc4 copy " + quote(grib) + " " + quote(dir + "/cdo.nc")).exit_code, 0);
  CommandResult converted = analyze(quote(dir + "/cdo.nc"), dir + "/from_cdo.nc");
  ASSERT_EQ(converted.exit_code, 0) << converted.output;
  // cdo puts relative humidity on its own axis of 25 levels: analysed on the common levels, and said so
  EXPECT_NE(converted.output.find("pressure levels:"), std::string::npos) << converted.output;
  EXPECT_NE(NcFile(dir + "/from_cdo.nc").text_att("", "pressure_levels_used").find("20 hPa"), std::string::npos);
  expect_same_analysis(dir + "/direct.nc", dir + "/from_cdo.nc");
  EXPECT_EQ(NcFile(dir + "/direct.nc").text_att("", "surface_pressure_source"), "input");
  EXPECT_EQ(NcFile(dir + "/from_cdo.nc").text_att("", "surface_pressure_source"), "input");
}

TEST(RealGrib, GfsGrib2AgreesWithItsGribToNetcdfConversion) {
  const std::string grib = ncep(kGfs);
  if (!have(grib, "grib_to_netcdf")) GTEST_SKIP() << "real data or ecCodes tools missing";
  const std::string dir = test_scratch();
  // As ../shared/real-data/ncep-nwp-pressure-levels/SOURCE.md: select, then convert.
  ASSERT_EQ(run_command("grib_copy -w typeOfLevel=isobaricInhPa,shortName=t/gh/r " + quote(grib) + " " +
                        quote(dir + "/pl.grib2") + " && grib_copy -w typeOfLevel=surface,shortName=sp " +
                        quote(grib) + " " + quote(dir + "/sfc.grib2") + " && grib_to_netcdf -D NC_FLOAT -o " +
                        quote(dir + "/pl.nc") + " " + quote(dir + "/pl.grib2") + " >/dev/null && grib_to_netcdf " +
                        "-D NC_FLOAT -o " + quote(dir + "/sfc.nc") + " " + quote(dir + "/sfc.grib2") + " >/dev/null")
                .exit_code,
            0);
  ASSERT_EQ(analyze(quote(grib), dir + "/direct.nc").exit_code, 0);
  CommandResult converted = analyze(quote(dir + "/pl.nc") + " " + quote(dir + "/sfc.nc"), dir + "/converted.nc");
  ASSERT_EQ(converted.exit_code, 0) << converted.output;
  expect_same_analysis(dir + "/direct.nc", dir + "/converted.nc");
}

TEST(RealGrib, IfsGrib1WithEightValidTimesAgreesWithItsCdoConversion) {
  if (!have(ifs(), "cdo")) GTEST_SKIP() << "real data or cdo missing";
  const std::string dir = test_scratch();
  CommandResult direct = analyze(quote(ifs()), dir + "/direct.nc");
  ASSERT_EQ(direct.exit_code, 0) << direct.output;
  ASSERT_EQ(run_command("cdo -s -f nc4 copy " + quote(ifs()) + " " + quote(dir + "/cdo.nc")).exit_code, 0);
  CommandResult converted = analyze(quote(dir + "/cdo.nc"), dir + "/from_cdo.nc");
  ASSERT_EQ(converted.exit_code, 0) << converted.output;
  expect_same_analysis(dir + "/direct.nc", dir + "/from_cdo.nc");
  // 2024-06-03 and -04, 00 and 12 UTC runs at steps 0 and 6 h: 8 validity times (SOURCE.md)
  EXPECT_EQ(read_field(NcFile(dir + "/direct.nc"), "time").size(), 8u);
}

TEST(RealGrib, IfsSampleWithoutSurfaceInformationSaysSoAndCanBeRefused) {
  if (!fs::exists(ifs())) GTEST_SKIP() << "real data missing";
  const std::string dir = test_scratch();
  CommandResult r = analyze(quote(ifs()), dir + "/out.nc");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("warning: the input has no surface pressure"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("surface pressure: none"), std::string::npos) << r.output;
  EXPECT_EQ(NcFile(dir + "/out.nc").text_att("", "surface_pressure_source"), "none");
  CommandResult refused = analyze(quote(ifs()), dir + "/refused.nc", "--set input.require_surface_pressure=true");
  EXPECT_EQ(refused.exit_code, 2) << refused.output;
  EXPECT_NE(refused.output.find("require_surface_pressure"), std::string::npos) << refused.output;
  EXPECT_FALSE(fs::exists(dir + "/refused.nc"));
}

TEST(RealGrib, EtaLambertGridCoordinatesAgreeWithCs2csWithinOneMillimetre) {
  const std::string grib = ncep(kEta);
  if (!have(grib, "cs2cs")) GTEST_SKIP() << "real data or cs2cs missing";
  const std::string dir = test_scratch();
  CommandResult r = analyze(quote(grib), dir + "/eta.nc");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  NcFile out(dir + "/eta.nc");
  Field x = read_field(out, "x"), y = read_field(out, "y"), lat = read_field(out, "lat"), lon = read_field(out, "lon");
  ASSERT_EQ(x.size(), 93u);  // NCEP grid 211: 93 x 65 points of 81.271 km (SOURCE.md)
  ASSERT_EQ(y.size(), 65u);
  EXPECT_NEAR(x.values[1] - x.values[0], 81271.0, 1e-6);
  // The grid's CRS as GRIB defines it: LCC, LoV 265 E, Latin1 = Latin2 = 25 N, sphere of 6371229 m.
  const std::string proj = "+proj=lcc +lat_1=25 +lat_2=25 +lat_0=25 +lon_0=265 +R=6371229 +units=m +no_defs";
  {  // x/y of every point back to lon/lat by cs2cs: equal to the output's 2-D lat/lon within 1 mm
    std::ofstream points(dir + "/xy.txt");
    points.precision(17);
    for (size_t j = 0; j < y.size(); ++j)
      for (size_t i = 0; i < x.size(); ++i) points << x.values[i] << " " << y.values[j] << "\n";
  }
  CommandResult inv = run_command("cs2cs -f %.12f " + quote(proj) + " +to +proj=longlat +R=6371229 +no_defs < " +
                                  quote(dir + "/xy.txt") + " > " + quote(dir + "/ll.txt"));
  ASSERT_EQ(inv.exit_code, 0) << inv.output;
  std::ifstream ll(dir + "/ll.txt");
  double max_m = 0;
  for (size_t k = 0; k < lat.size(); ++k) {
    double lo, la, h;
    ll >> lo >> la >> h;
    const double dlat_m = (la - lat.values[k]) * M_PI / 180.0 * 6371229.0;
    const double dlon_m = std::remainder(lo - lon.values[k], 360.0) * M_PI / 180.0 * 6371229.0 * std::cos(la * M_PI / 180);
    max_m = std::max(max_m, std::hypot(dlat_m, dlon_m));
  }
  EXPECT_LT(max_m, 1e-3) << "largest distance " << max_m << " m";
  // The first point is where GRIB puts it: 12.19 N 226.541 E (SOURCE.md; GRIB2 La1/Lo1 in microdegrees)
  EXPECT_NEAR(lat.values[0], 12.19, 1e-6);
  EXPECT_NEAR(std::remainder(lon.values[0] - 226.541, 360.0), 0.0, 1e-6);
  EXPECT_FALSE(out.text_att("", "input_files").empty());
  EXPECT_EQ(out.text_att("crs", "grid_mapping_name"), "lambert_conformal_conic");
}

TEST(RealGrib, GfsPressureLevelsWithOrographyReproduceTheRunWithSurfacePressure) {
  const std::string pl = ncep("derived-netcdf/gfs_2p5deg_20110110_12z_f120_pl_t_gh_r.nc");
  const std::string sfc = ncep("derived-netcdf/gfs_2p5deg_20110110_12z_f120_sfc_sp_orog_cape_cin.nc");
  if (!have(pl, "cdo") || !fs::exists(sfc)) GTEST_SKIP() << "real data or cdo missing";
  const std::string dir = test_scratch();
  ASSERT_EQ(run_command("cdo -s selname,orog " + quote(sfc) + " " + quote(dir + "/orog.nc")).exit_code, 0);
  ASSERT_EQ(run_command("cdo -s selname,sp " + quote(sfc) + " " + quote(dir + "/sp.nc")).exit_code, 0);
  CommandResult real = analyze(quote(pl) + " " + quote(dir + "/sp.nc"), dir + "/real.nc");
  ASSERT_EQ(real.exit_code, 0) << real.output;
  CommandResult derived = analyze(quote(pl) + " " + quote(dir + "/orog.nc"), dir + "/derived.nc");
  ASSERT_EQ(derived.exit_code, 0) << derived.output;
  EXPECT_NE(derived.output.find("surface pressure: derived from the surface height ('orog'"), std::string::npos)
      << derived.output;
  EXPECT_EQ(NcFile(dir + "/derived.nc").text_att("", "surface_pressure_source"), "derived_from_surface_geopotential");

  // Surface pressure: derived from orography and the geopotential heights vs the model's.
  {
    InputDataset with_orog({pl, dir + "/orog.nc"}, {});
    ColumnBlock block;
    with_orog.read_block(0, {0, with_orog.grid().n_columns}, block);
    Field sp = read_field(NcFile(sfc), "sp");
    double sum = 0, worst = 0;
    for (size_t c = 0; c < sp.size(); ++c) {
      const double e = std::abs(block.surface_pressure_pa[c] - sp.values[c]) / 100.0;
      sum += e;
      worst = std::max(worst, e);
    }
    std::printf("[ figures  ] GFS 2011-01-15 12 UTC: derived surface pressure error mean %.2f hPa, max %.2f hPa\n",
                sum / sp.size(), worst);
    EXPECT_LT(sum / sp.size(), 3.0);  // hPa
  }
  // MU CAPE agrees within max(50 J/kg, 10 %) in nearly every column.
  Field a = read_field(NcFile(dir + "/real.nc"), "mu_cape"), b = read_field(NcFile(dir + "/derived.nc"), "mu_cape");
  size_t agree = 0;
  for (size_t k = 0; k < a.size(); ++k) {
    const double x = std::isnan(a.values[k]) ? 0 : a.values[k], y = std::isnan(b.values[k]) ? 0 : b.values[k];
    if (std::abs(x - y) <= std::max(50.0, 0.1 * std::max(x, y))) ++agree;
  }
  const double share = static_cast<double>(agree) / a.size();
  std::printf("[ figures  ] MU CAPE within max(50 J/kg, 10 %%): %.2f %% of %zu columns\n", 100 * share, a.size());
  EXPECT_GT(share, 0.98);
  // The Andes column of the issue (10 S 77.5 W, surface near 654 hPa): no false CAPE from below ground.
  CommandResult column = run_command(binary() + " column " + quote(pl) + " " + quote(dir + "/orog.nc") +
                                     " --lat -10 --lon -77.5 --format json");
  ASSERT_EQ(column.exit_code, 0) << column.output;
  EXPECT_NE(column.output.find("\"surface_pressure_source\": \"derived_from_surface_geopotential\""),
            std::string::npos);
  EXPECT_NE(column.output.find("\"below_ground\": true"), std::string::npos);
}

TEST(RealGrib, ClimatologyTakesThePressureLevelAndSurfacePairAndGrib) {
  const std::string pl = ncep("derived-netcdf/gfs_2p5deg_20110110_12z_f120_pl_t_gh_r.nc");
  const std::string sfc = ncep("derived-netcdf/gfs_2p5deg_20110110_12z_f120_sfc_sp_orog_cape_cin.nc");
  if (!fs::exists(pl) || !fs::exists(ifs())) GTEST_SKIP() << "real data missing";
  const std::string dir = test_scratch();
  CommandResult pair = run_command(binary() + " climatology " + quote(pl) + " " + quote(sfc) + " -o " +
                                   quote(dir + "/pair.nc"));
  ASSERT_EQ(pair.exit_code, 0) << pair.output;
  EXPECT_EQ(NcFile(dir + "/pair.nc").text_att("", "surface_pressure_source"), "input");
  CommandResult grib = run_command(binary() + " climatology " + quote(ifs()) + " -o " + quote(dir + "/ifs.nc"));
  ASSERT_EQ(grib.exit_code, 0) << grib.output;
  EXPECT_EQ(NcFile(dir + "/ifs.nc").text_att("", "surface_pressure_source"), "none");
  Field count = read_field(NcFile(dir + "/ifs.nc"), "count");
  EXPECT_EQ(*std::max_element(count.values.begin(), count.values.end()), 8.0);  // 8 validity times
}

TEST(RealGrib, TruncatedGribIsBadInput) {
  const std::string grib = ncep(kEta);
  if (!fs::exists(grib)) GTEST_SKIP() << "real data missing";
  const std::string dir = test_scratch();
  ASSERT_EQ(run_command("head -c 200000 " + quote(grib) + " > " + quote(dir + "/cut.grib2")).exit_code, 0);
  CommandResult r = analyze(quote(dir + "/cut.grib2"), dir + "/out.nc");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("cut.grib2"), std::string::npos) << r.output;
}

}  // namespace
}  // namespace latentlift::test::cli
