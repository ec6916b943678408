// Saturation over ice, relative-humidity references and the surface pressure derived from
// a column's geopotential heights, against published values (source beside each value).
#include <gtest/gtest.h>

#include <cmath>
#include <limits>

#include "latentlift/thermo.hpp"

namespace {

using namespace latentlift::thermo;

TEST(SaturationOverIce, MatchesIapwsSublimationCheckValueAt230K) {
  // IAPWS R14-08(2011), Table 3: sublimation pressure 8.94735e-6 MPa at 230 K
  // (../shared/real-data/water-vapour-check-values).
  EXPECT_NEAR(saturation_vapour_pressure_ice_pa(230.0), 8.94735, 8.94735 * 1e-3);
}

TEST(SaturationOverIce, MatchesTriplePointPressure) {
  // IAPWS triple point 273.16 K, 611.657 Pa (Wexler 1976); Murphy and Koop (2005) fit it to 0.05 %.
  EXPECT_NEAR(saturation_vapour_pressure_ice_pa(273.16), 611.657, 611.657 * 5e-4);
}

TEST(SaturationOverIce, IsBelowSaturationOverWaterWhenSupercooled) {
  // Common practice: e_ice < e_water below 0 degC; at -20 degC about 103 Pa over ice against 125-126 Pa
  // over water, a ratio near 0.82 (handbook values, from memory).
  const double ratio = saturation_vapour_pressure_ice_pa(253.15) / saturation_vapour_pressure_pa(253.15);
  EXPECT_GT(ratio, 0.80);
  EXPECT_LT(ratio, 0.84);
}

TEST(RelativeHumidityReference, WaterLeavesTheValueUnchanged) {
  EXPECT_DOUBLE_EQ(relative_humidity_over_water(0.9, 240.0, SaturationReference::water), 0.9);
}

TEST(RelativeHumidityReference, IceBelowFreezingScalesByTheSaturationRatio) {
  // Saturation over ice at 230 K is 8.94735 Pa (IAPWS R14-08); over water Bolton eq. 10 gives the denominator.
  const double rh_w = relative_humidity_over_water(1.0, 230.0, SaturationReference::ice_below_freezing);
  EXPECT_NEAR(rh_w, 8.94735 / saturation_vapour_pressure_pa(230.0), 2e-3);
  EXPECT_DOUBLE_EQ(relative_humidity_over_water(0.5, 280.0, SaturationReference::ice_below_freezing), 0.5);
}

TEST(RelativeHumidityReference, MixedFollowsTheIfsQuadraticBlend) {
  // ECMWF IFS Documentation Cy47r3, Part IV, ch. 12: alpha = ((T - 250.16) / (273.16 - 250.16))^2;
  // ice at and below 250.16 K, water at and above 273.16 K.
  MixedPhase ifs;
  const double t = 261.66;  // half way: alpha = 0.25
  const double expected = 0.25 * saturation_vapour_pressure_pa(t) + 0.75 * saturation_vapour_pressure_ice_pa(t);
  EXPECT_NEAR(saturation_vapour_pressure_reference_pa(t, SaturationReference::mixed, ifs), expected, 1e-9);
  EXPECT_DOUBLE_EQ(saturation_vapour_pressure_reference_pa(245.0, SaturationReference::mixed, ifs),
                   saturation_vapour_pressure_ice_pa(245.0));
  EXPECT_DOUBLE_EQ(saturation_vapour_pressure_reference_pa(275.0, SaturationReference::mixed, ifs),
                   saturation_vapour_pressure_pa(275.0));
}

TEST(RelativeHumidityReference, MixedWithTheNcepThresholdsIsLinear) {
  // NCEP GFS physics library funcphys, fpvsx: water above the triple point, ice 20 K below it, linear between.
  MixedPhase ncep{253.16, 273.16, 1.0};
  const double t = 263.16;  // half way
  const double expected = 0.5 * saturation_vapour_pressure_pa(t) + 0.5 * saturation_vapour_pressure_ice_pa(t);
  EXPECT_NEAR(saturation_vapour_pressure_reference_pa(t, SaturationReference::mixed, ncep), expected, 1e-9);
}

// ICAO standard atmosphere (ISO 2533:1975), geopotential altitude -> pressure, temperature:
// 0 m 101325 Pa 288.15 K; 1000 m 89874.6 Pa 281.65 K; 2000 m 79495.2 Pa 275.15 K; 1500 m 84556 Pa.
const double kP[] = {79495.2, 89874.6};
const double kZ[] = {2000.0, 1000.0};
const double kT[] = {275.15, 281.65};

TEST(SurfacePressureFromHeight, ExtrapolatesBelowTheLowestLevelAlongTheStandardLapseRate) {
  EXPECT_NEAR(surface_pressure_from_height_pa(2, kP, kZ, kT, 0.0), 101325.0, 5.0);  // ISO 2533 at 0 m
}

TEST(SurfacePressureFromHeight, InterpolatesInLogPressureBetweenLevels) {
  // Linear in ln p: half way up the layer lies the geometric mean of its pressures (exact).
  EXPECT_NEAR(surface_pressure_from_height_pa(2, kP, kZ, kT, 1500.0), std::sqrt(kP[0] * kP[1]), 1e-6);
  // ISO 2533 at 1500 m: 84556 Pa; an isothermal-layer (ln p) interpolation across 1 km of the
  // 6.5 K/km atmosphere is 30 Pa below it at mid-layer (common practice: ln p interpolation error).
  EXPECT_NEAR(surface_pressure_from_height_pa(2, kP, kZ, kT, 1500.0), 84556.0, 40.0);
  EXPECT_NEAR(surface_pressure_from_height_pa(2, kP, kZ, kT, 1000.0), 89874.6, 1e-6);
}

TEST(SurfacePressureFromHeight, SkipsMissingLevelsAndIgnoresTheirOrder) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double p[] = {89874.6, 50000.0, 79495.2};
  const double z[] = {1000.0, nan, 2000.0};
  const double t[] = {281.65, 250.0, 275.15};
  EXPECT_NEAR(surface_pressure_from_height_pa(3, p, z, t, 1500.0), std::sqrt(89874.6 * 79495.2), 1e-6);
}

TEST(SurfacePressureFromHeight, IsMissingAboveTheHighestLevel) {
  EXPECT_TRUE(std::isnan(surface_pressure_from_height_pa(2, kP, kZ, kT, 5000.0)));
}

}  // namespace
