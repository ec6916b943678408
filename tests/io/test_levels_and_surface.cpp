// The reader's pressure levels (matched by value, common levels of all quantities), surface
// pressure (input, derived from surface height, none) and relative-humidity references.
#include <gtest/gtest.h>

#include <cmath>

#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "latentlift/thermo.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Att;
using test::Var;

// An invented 2x2 grid: temperature and heights on 4 levels, humidity on 3 of them (another axis).
const std::vector<double> kLevelsHpa = {1000, 850, 700, 500};
const std::vector<double> kHeightsM = {100, 1450, 3000, 5600};  // roughly standard-atmosphere heights
double temp_k(std::size_t k, std::size_t c) { return 288.0 - 8.0 * k - 0.5 * c; }
double rh_percent(std::size_t k, std::size_t c) { return 90.0 - 10.0 * k + c; }

class LevelsAndSurface : public ::testing::Test {
 protected:
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path(const std::string& name) const { return dir + "/" + name; }

  /// Humidity on `rh_levels_pa` (axis named rh_axis), the rest on plev (hPa); optional 2-D extras.
  void write(const std::string& file, const std::vector<double>& rh_levels_pa, const std::string& rh_axis,
             std::vector<Var> extra = {}) {
    test::Dims dims = {{"plev", 4}, {"lat", 2}, {"lon", 2}};
    if (rh_axis != "plev") dims.insert(dims.begin() + 1, {rh_axis, rh_levels_pa.size()});
    std::vector<double> t, z, r;
    for (std::size_t k = 0; k < 4; ++k)
      for (std::size_t c = 0; c < 4; ++c) {
        t.push_back(temp_k(k, c));
        z.push_back(kHeightsM[k]);
      }
    for (double p : rh_levels_pa) {
      std::size_t k = 0;
      while (std::abs(kLevelsHpa[k] * 100 - p) > 1) ++k;
      for (std::size_t c = 0; c < 4; ++c) r.push_back(rh_percent(k, c));
    }
    std::vector<Var> vars = {
        {"plev", NC_DOUBLE, {"plev"}, {{"units", "hPa"}}, kLevelsHpa},
        {"lat", NC_DOUBLE, {"lat"}, {{"units", "degrees_north"}}, {10, 20}},
        {"lon", NC_DOUBLE, {"lon"}, {{"units", "degrees_east"}}, {30, 40}},
        {"t", NC_FLOAT, {"plev", "lat", "lon"}, {{"units", "K"}, {"standard_name", "air_temperature"}}, t},
        {"gh", NC_FLOAT, {"plev", "lat", "lon"}, {{"units", "m"}, {"standard_name", "geopotential_height"}}, z},
        {"r", NC_FLOAT, {rh_axis, "lat", "lon"}, {{"units", "%"}, {"standard_name", "relative_humidity"}}, r}};
    if (rh_axis != "plev") vars.push_back({rh_axis, NC_DOUBLE, {rh_axis}, {{"units", "Pa"}}, rh_levels_pa});
    for (Var& v : extra) vars.push_back(v);
    test::write_nc(path(file), dims, vars);
  }
  static Var orography(std::vector<double> heights_m) {
    return {"orog", NC_FLOAT, {"lat", "lon"}, {{"units", "m"}, {"standard_name", "geopotential_height"}}, heights_m};
  }
};

TEST_F(LevelsAndSurface, QuantitiesOnDifferentLevelSetsAreAnalysedOnTheCommonLevels) {
  write("in.nc", {70000, 85000, 100000}, "plev_2");  // no 500 hPa, other order, other name, Pa
  InputDataset input({path("in.nc")}, {});
  ASSERT_EQ(input.grid().pressure_pa.size(), 3u);
  EXPECT_DOUBLE_EQ(input.grid().pressure_pa[2], 70000.0);
  EXPECT_NE(input.common_levels_note().find("500 hPa"), std::string::npos) << input.common_levels_note();
  ColumnBlock block;
  input.read_block(0, {0, 4}, block);
  // Column 3, level 700 hPa (index 2 of the common levels): RH matched by value, not by position.
  EXPECT_NEAR(block.humidity[3 * 3 + 2], rh_percent(2, 3) / 100.0, 1e-6);
  EXPECT_NEAR(block.temp_k[3 * 3 + 2], temp_k(2, 3), 1e-4);
}

TEST_F(LevelsAndSurface, AxesWithEqualValuesButDifferentNamesAreTheSameLevels) {
  write("in.nc", {100000, 85000, 70000, 50000}, "plev_2");
  InputDataset input({path("in.nc")}, {});
  EXPECT_EQ(input.grid().pressure_pa.size(), 4u);
  EXPECT_TRUE(input.common_levels_note().empty());
}

TEST_F(LevelsAndSurface, SurfacePressureIsDerivedFromOrographyTaggedAsGeopotentialHeight) {
  write("in.nc", {100000, 85000, 70000, 50000}, "plev", {orography({0, 100, 2200, 3000})});
  InputDataset input({path("in.nc")}, {});
  EXPECT_EQ(input.surface_pressure_source(), SurfacePressureSource::derived_from_surface_geopotential);
  ColumnBlock block;
  input.read_block(0, {0, 4}, block);
  ASSERT_EQ(block.surface_pressure_pa.size(), 4u);
  EXPECT_NEAR(block.surface_pressure_pa[1], 100000.0, 0.5);  // at the height of the 1000 hPa level
  EXPECT_NEAR(block.surface_pressure_pa[3], 70000.0, 0.5);   // at the height of the 700 hPa level
  // Between 850 (1450 m) and 700 hPa (3000 m), linear in ln p:
  const double expected = std::exp(std::log(85000.0) + (2200.0 - 1450.0) / 1550.0 * std::log(70000.0 / 85000.0));
  EXPECT_NEAR(block.surface_pressure_pa[2], expected, 0.5);
  // Below the lowest level: ICAO lapse rate from 288 K at 100 m (ISO 2533 form p0 (T/T0)^(g0/(R gamma))).
  const double ts = temp_k(0, 0) + 0.0065 * 100.0;
  EXPECT_NEAR(block.surface_pressure_pa[0], 100000.0 * std::pow(ts / temp_k(0, 0), 9.80665 / (287.05287 * 0.0065)),
              0.5);
}

TEST_F(LevelsAndSurface, WithoutSurfaceInformationTheSourceIsNone) {
  write("in.nc", {100000, 85000, 70000, 50000}, "plev");
  InputDataset input({path("in.nc")}, {});
  EXPECT_EQ(input.surface_pressure_source(), SurfacePressureSource::none);
  EXPECT_STREQ(to_string(input.surface_pressure_source()), "none");
}

TEST_F(LevelsAndSurface, RequiringSurfacePressureRefusesInputWithoutIt) {
  write("in.nc", {100000, 85000, 70000, 50000}, "plev");
  InputConventions conventions;
  conventions.require_surface_pressure = true;
  EXPECT_THROW(InputDataset({path("in.nc")}, {}, conventions), InputError);
}

TEST_F(LevelsAndSurface, RelativeHumidityOverIceIsConvertedToOverWater) {
  write("in.nc", {100000, 85000, 70000, 50000}, "plev");
  InputConventions conventions;
  conventions.relative_humidity_over = thermo::SaturationReference::ice_below_freezing;
  InputDataset input({path("in.nc")}, {}, conventions);
  ColumnBlock block;
  input.read_block(0, {0, 4}, block);
  // Level 500 hPa of column 0 is at 264 K: RH_water = RH_ice e_ice / e_water (Murphy and Koop 2005; Bolton 1980).
  const double t = temp_k(3, 0);
  ASSERT_LT(t, 273.15);
  const double expected = rh_percent(3, 0) / 100.0 * thermo::saturation_vapour_pressure_ice_pa(t) /
                          thermo::saturation_vapour_pressure_pa(t);
  EXPECT_NEAR(block.humidity[0 * 4 + 3], expected, 1e-6);
  EXPECT_NEAR(block.humidity[0 * 4 + 0], rh_percent(0, 0) / 100.0, 1e-6);  // 288 K: unchanged
}

TEST_F(LevelsAndSurface, MismatchedTimesAcrossFilesAreReportedWithBothTimes) {
  const std::string units = "hours since 2024-01-01 00:00:00";
  auto file = [&](const std::string& name, double hour, bool with_levels) {
    test::Dims dims = {{"time", 1}, {"plev", 4}, {"lat", 2}, {"lon", 2}};
    std::vector<Var> vars = {{"time", NC_DOUBLE, {"time"}, {{"units", units}}, {hour}},
                             {"plev", NC_DOUBLE, {"plev"}, {{"units", "hPa"}}, kLevelsHpa},
                             {"lat", NC_DOUBLE, {"lat"}, {{"units", "degrees_north"}}, {10, 20}},
                             {"lon", NC_DOUBLE, {"lon"}, {{"units", "degrees_east"}}, {30, 40}}};
    if (with_levels) {
      vars.push_back({"t", NC_FLOAT, {"time", "plev", "lat", "lon"}, {{"units", "K"}}, std::vector<double>(16, 280.0)});
      vars.push_back({"r", NC_FLOAT, {"time", "plev", "lat", "lon"}, {{"units", "%"}}, std::vector<double>(16, 50.0)});
      vars.push_back({"gh", NC_FLOAT, {"time", "plev", "lat", "lon"}, {{"units", "m"}}, std::vector<double>(16, 1000.0)});
    } else {
      vars.push_back({"sp", NC_FLOAT, {"time", "lat", "lon"}, {{"units", "Pa"}}, std::vector<double>(4, 100000.0)});
    }
    test::write_nc(path(name), dims, vars);
  };
  file("pl.nc", 0.0, true);
  file("sfc.nc", 6.0, false);
  InputAliases aliases = {{"air_temperature", {"t"}}, {"relative_humidity", {"r"}},
                          {"geopotential_height", {"gh"}}, {"surface_air_pressure", {"sp"}}};
  try {
    InputDataset input({path("pl.nc"), path("sfc.nc")}, aliases);
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    const std::string text = e.what();
    EXPECT_NE(text.find("0 " + units), std::string::npos) << text;
    EXPECT_NE(text.find("6 " + units), std::string::npos) << text;
  }
}

}  // namespace
}  // namespace latentlift
