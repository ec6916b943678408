// Hand-built columns whose answers are known by construction (METHODS.md
// "Latent instability", "Parcels, free convection and the lift needed",
// "Quality control"). Each profile says how it is built and why its answer follows.
//
// Construction tool: the environment is often placed ON a chosen pseudo-adiabat,
// i.e. its temperature at a level is pseudoadiabat::reference_temperature_k(theta,
// p) (the accurate ODE integration of the AMS Glossary lapse rate, checked against
// published values in tests/thermo). Then that level's saturation theta_w IS theta
// by definition, and the kernel's (table) answer must match within the table's
// 0.02 K bound (METHODS "Pseudo-adiabats").
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <random>
#include <limits>
#include <string>
#include <vector>

#include "column/random_columns.hpp"
#include "latentlift/column.hpp"
#include "latentlift/pseudoadiabat.hpp"
#include "latentlift/settings.hpp"
#include "latentlift/thermo.hpp"

namespace latentlift {
namespace {

using test::OwnedColumn;
namespace th = thermo;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kTableTolK = 0.02;  // fast path vs reference (METHODS "Pseudo-adiabats")

/// Levels 1000..100 hPa of ERA5 (27 levels), bottom-up.
const std::vector<double>& levels_hpa() {
  static const std::vector<double> l = test::era5_levels_to_100_hpa();
  return l;
}

/// Temperature, K, at p_hpa on the pseudo-adiabat theta_w_k (reference integrator).
double on_adiabat(double theta_w_k, double p_hpa) {
  return pseudoadiabat::reference_temperature_k(theta_w_k, p_hpa * 100.0);
}

/// Dew point, K, of air at temp_k with relative humidity rh (fraction, over water).
double dew_point_at_rh(double temp_k, double rh) {
  return th::dew_point_k(rh * th::saturation_vapour_pressure_pa(temp_k));
}

/// A column given bottom-up as (p hPa, T K, Td K), humidity as dew point; heights
/// from the hypsometric equation (common practice) with the layer-mean temperature,
/// 0 m at the lowest level.
struct Sounding {
  std::vector<double> p_hpa, t, td;
  void add(double p, double temp, double dew) {
    p_hpa.push_back(p);
    t.push_back(temp);
    td.push_back(dew);
  }
  OwnedColumn column() const {
    OwnedColumn c;
    c.humidity_kind = HumidityKind::dew_point;
    double z = 0.0;
    for (size_t k = 0; k < p_hpa.size(); ++k) {
      if (k > 0)
        z += th::kRd * 0.5 * (t[k] + t[k - 1]) / th::kGravity * std::log(p_hpa[k - 1] / p_hpa[k]);
      c.pressure_pa.push_back(p_hpa[k] * 100.0);
      c.temp_k.push_back(t[k]);
      c.humidity.push_back(td[k]);
      c.height_m.push_back(z);
    }
    return c;
  }
  int index_of(double p) const {
    for (size_t k = 0; k < p_hpa.size(); ++k)
      if (p_hpa[k] == p) return static_cast<int>(k);
    return -1;
  }
};

AnalysisSettings settings_for(BuoyancyMode mode, bool level_fields = true) {
  AnalysisSettings s;
  s.buoyancy = mode;
  s.level_fields = level_fields;
  return s;
}

/// Height (m) at pressure p_pa, linear in ln p between the column's levels (METHODS).
double height_at(const OwnedColumn& c, double p_pa) {
  for (int k = 0; k + 1 < c.n(); ++k) {
    const double a = c.pressure_pa[k], b = c.pressure_pa[k + 1];
    if (p_pa <= a && p_pa >= b) {
      const double s = std::log(a / p_pa) / std::log(a / b);
      return c.height_m[k] + s * (c.height_m[k + 1] - c.height_m[k]);
    }
  }
  return kNaN;
}

/// Where the maximum excess crosses min_excess between a flagged and an unflagged
/// level: linear in ln p between the two levels (METHODS "Latently unstable layers").
double crossing_pa(double p_flagged, double ex_flagged, double p_other, double ex_other, double min_ex) {
  const double f = (min_ex - ex_other) / (ex_flagged - ex_other);
  return std::exp(std::log(p_other) + f * (std::log(p_flagged) - std::log(p_other)));
}

// ============================================================ profiles

// Profile "stable": isothermal at 240 K with 80 % relative humidity from 1000 to
// 100 hPa. An isothermal layer is warmer than every adiabat through its base, so
// theta_w_star grows with height everywhere and no parcel, lifted from anywhere,
// ever becomes warmer than its surroundings: no latent instability at all. The
// coldest pseudo-adiabat touching the profile is the one through its base, whose
// theta_w is the 1000 hPa temperature itself (theta_w is defined as the
// temperature at 1000 hPa), so tangent_theta_w = 240 K at 1000 hPa.
constexpr double kIsothermalK = 240.0;

Sounding stable_isothermal() {
  Sounding s;
  for (double p : levels_hpa()) s.add(p, kIsothermalK, dew_point_at_rh(kIsothermalK, 0.8));
  return s;
}

// Profile "inversion": a strong surface inversion (+4 K per level, 270 K at 1000 hPa
// to 294 K at 850 hPa), then a lapse rate of 4 K/km (less than the saturated
// adiabatic lapse rate at any temperature here, about 4-5 K/km near 20 degC and more
// when colder: handbook values, from memory) down to 210 K, RH 50 %. theta_w_star
// grows with height everywhere: absolutely stable.
Sounding stable_inversion() {
  Sounding s;
  double t = 270.0;
  for (double p : levels_hpa()) {
    if (!s.p_hpa.empty()) {
      const double p0 = s.p_hpa.back();
      if (p >= 850.0) {
        t += 4.0;
      } else {
        const double dz = th::kRd * t / th::kGravity * std::log(p0 / p);
        t = std::max(t - 4.0e-3 * dz, 210.0);
      }
    }
    s.add(p, t, dew_point_at_rh(t, 0.5));
  }
  return s;
}

// Profile "surface-based" (theta_A = 290.15 K, tangent at 850 hPa):
//  * 1000, 975, 950, 925 hPa: saturated (Td = T), ON the pseudo-adiabats
//    theta_A + 2.0, 1.5, 1.0, 0.5 K: a moist boundary layer whose theta_w is known
//    exactly (for saturated air theta_w = theta_w_star);
//  * 900, 875 hPa: a dry layer (RH 30 %) on the pseudo-adiabat theta_A + 1 K: warm
//    (theta_w_star > theta_A) but with a low theta_w;
//  * 850 .. 250 hPa: RH 50 %, on the pseudo-adiabats theta_A + 0.025 K/hPa *
//    (850 hPa - p): theta_w_star is smallest (theta_A) at 850 hPa and grows upward;
//  * 225 .. 100 hPa: isothermal (a stratosphere), dry.
// So the tangent adiabat is theta_A at 850 hPa; the four boundary-layer levels have
// theta_w > theta_A and are flagged (their LCL is their own level); every other
// level has theta_w below theta_A (dry 900/875 hPa) or below the theta_w_star of
// every level above it (RH 50 % aloft), so it is not flagged. The layer is
// surface-based: bottom at 1000 hPa, top between 925 and 900 hPa where the maximum
// excess crosses min_excess_k. The MU parcel is 1000 hPa (theta_w = theta_A + 2):
// buoyant from its source up to where theta_A + 0.025 (850 - p) = theta_A + 2, i.e.
// p = 770 hPa (the EL, in temperature mode); never negatively buoyant below its LFC.
constexpr double kThetaA = 290.15;
constexpr double kSlopeKPerHpa = 0.025;

Sounding surface_based() {
  Sounding s;
  const double bl[] = {2.0, 1.5, 1.0, 0.5};
  int i = 0;
  for (double p : levels_hpa()) {
    double t;
    if (p >= 925.0) {
      t = on_adiabat(kThetaA + bl[i++], p);
      s.add(p, t, t);
      continue;
    }
    if (p >= 875.0) {
      t = on_adiabat(kThetaA + 1.0, p);
      s.add(p, t, dew_point_at_rh(t, 0.3));
      continue;
    }
    if (p >= 250.0) {
      t = on_adiabat(kThetaA + kSlopeKPerHpa * (850.0 - p), p);
      s.add(p, t, dew_point_at_rh(t, 0.5));
      continue;
    }
    t = s.t.back();
    s.add(p, t, dew_point_at_rh(t, 0.1));
  }
  return s;
}

// Profile "elevated" (theta_B = 288.15 K, tangent of the upper part at 800 hPa):
//  * 1000 .. 925 hPa: an isothermal cold pool at theta_B - 5 K, RH 70 %;
//  * 900 hPa: the top of an inversion, on the pseudo-adiabat theta_B + 6 K, RH 20 %
//    (about 7 K warmer than 925 hPa);
//  * 875, 850, 825 hPa: a saturated layer on the pseudo-adiabats theta_B + 1.5,
//    1.0, 0.5 K;
//  * 800 .. 250 hPa: RH 50 %, on theta_B + 0.025 K/hPa * (800 hPa - p);
//  * 225 .. 100 hPa: isothermal, dry.
// The cold pool has theta_w below theta_B - 5 K and every level above its LCL has a
// larger theta_w_star; the inversion top is dry (theta_w far below theta_B); so the
// only flagged levels are 875, 850 and 825 hPa: an elevated layer whose bottom lies
// between 900 and 875 hPa and whose top lies between 825 and 800 hPa. The coldest
// pseudo-adiabat touching the whole profile is the one through the cold surface:
// tangent at 1000 hPa with theta_w = theta_B - 5 K (the 1000 hPa temperature).
constexpr double kThetaB = 288.15;

Sounding elevated() {
  Sounding s;
  const double moist[] = {1.5, 1.0, 0.5};
  int i = 0;
  for (double p : levels_hpa()) {
    double t;
    if (p >= 925.0) {
      t = kThetaB - 5.0;
      s.add(p, t, dew_point_at_rh(t, 0.7));
    } else if (p == 900.0) {
      t = on_adiabat(kThetaB + 6.0, p);
      s.add(p, t, dew_point_at_rh(t, 0.2));
    } else if (p >= 825.0) {
      t = on_adiabat(kThetaB + moist[i++], p);
      s.add(p, t, t);
    } else if (p >= 250.0) {
      t = on_adiabat(kThetaB + kSlopeKPerHpa * (800.0 - p), p);
      s.add(p, t, dew_point_at_rh(t, 0.5));
    } else {
      t = s.t.back();
      s.add(p, t, dew_point_at_rh(t, 0.1));
    }
  }
  return s;
}

// Profile "superadiabatic, dry": a hot, dry surface (1000 hPa: 310 K, Td 275 K)
// under a superadiabatic layer (environment lapse rate 12 K/km to 950 hPa, above the
// dry adiabatic 9.8 K/km), then a stable 4 K/km up to 600 hPa and 6.5 K/km above,
// RH 20 % everywhere above the surface. The surface parcel is warmer than its
// surroundings inside the superadiabatic layer (by about 1 K at 950 hPa) but, far
// below its LCL (near 600 hPa), it cools dry-adiabatically through the stable layer
// and arrives at the LCL some 20 K colder than the environment. That excess is
// absolute instability, not latent (METHODS): no flag, no LFC.
Sounding superadiabatic_dry() {
  Sounding s;
  double t = 310.0;
  for (double p : levels_hpa()) {
    if (s.p_hpa.empty()) {
      s.add(p, t, 275.0);
      continue;
    }
    const double p0 = s.p_hpa.back();
    const double lapse = p >= 950.0 ? 12.0e-3 : (p >= 600.0 ? 4.0e-3 : 6.5e-3);
    // hypsometric thickness with the lower temperature (accurate enough to set a lapse rate)
    const double dz = th::kRd * t / th::kGravity * std::log(p0 / p);
    t = std::max(t - lapse * dz, 210.0);
    s.add(p, t, dew_point_at_rh(t, 0.2));
  }
  return s;
}

/// Bolton (1980) LCL pressure, Pa, of surface air (T, Td) at p_pa (kernel's recipe, METHODS).
double lcl_pa(double t, double td, double p_pa) {
  const double r = th::mixing_ratio(th::saturation_vapour_pressure_pa(td), p_pa);
  return th::lcl_pressure_pa(t, p_pa, th::lcl_temperature_k(t, td), r);
}

/// The dew point in [lo, hi], K, where increasing(td) reaches target (bisection to rounding).
template <class F>
double dew_point_where(F increasing, double target, double lo, double hi) {
  for (int it = 0; it < 200; ++it) {
    const double mid = 0.5 * (lo + hi);
    (increasing(mid) < target ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

/// Dew point, K, of air at t (K) and p0_pa whose Bolton LCL lies at lcl_target_pa.
double dew_point_for_lcl(double t, double p0_pa, double lcl_target_pa) {
  // LCL pressure grows with the dew point
  return dew_point_where([&](double td) { return lcl_pa(t, td, p0_pa); }, lcl_target_pa, 250.0, t);
}

// Profile "warm at the LCL": surface air at 1000 hPa, 303 K, with the dew point
// chosen so that its (Bolton) LCL lies at 920 hPa. Below the LCL the environment is
// 1.5 K colder than the parcel's dry adiabat (a superadiabatic 1000-975 hPa layer,
// then dry-adiabatic), with the parcel's mixing ratio (well mixed). At 900 hPa, just
// above the LCL, the environment is 0.2 K WARMER than the parcel's pseudo-adiabat,
// and above it lies on pseudo-adiabats warmer than the parcel's by 1 K and more. So
// the parcel reaches its LCL about 1 K warmer than its surroundings (excess gained
// below, in the superadiabatic layer) and is colder than the environment at every
// level above: METHODS says it counts as flagged, with its LFC at the LCL (the
// graphical tangent test, which only sees levels, would miss it).
struct WarmAtLcl {
  Sounding sounding;
  double lcl_pa;
};

WarmAtLcl warm_at_lcl() {
  const double t0 = 303.0, p0 = 100000.0;
  const double td0 = dew_point_for_lcl(t0, p0, 92000.0);
  const double r0 = th::mixing_ratio(th::saturation_vapour_pressure_pa(td0), p0);
  const double kappa = th::poisson_kappa(r0);
  const double lcl_t = th::lcl_temperature_k(t0, td0);
  const double p_lcl = lcl_pa(t0, td0, p0);
  const double theta_w = pseudoadiabat::reference_theta_w_k(lcl_t, p_lcl);
  WarmAtLcl out{{}, p_lcl};
  for (double p : levels_hpa()) {
    const double ppa = p * 100.0;
    if (p == 1000.0) {
      out.sounding.add(p, t0, td0);
    } else if (ppa > p_lcl) {
      const double t = t0 * std::pow(ppa / p0, kappa) - 1.5;
      const double td = th::dew_point_k(th::vapour_pressure_from_mixing_ratio_pa(r0, ppa));
      out.sounding.add(p, t, std::min(td, t));
    } else if (p == 900.0) {
      const double t = pseudoadiabat::reference_follow_k(lcl_t, p_lcl, ppa) + 0.2;
      out.sounding.add(p, t, dew_point_at_rh(t, 0.6));
    } else if (p >= 250.0) {
      const double t = on_adiabat(theta_w + 1.0 + kSlopeKPerHpa * (875.0 - p), p);
      out.sounding.add(p, t, dew_point_at_rh(t, 0.6));
    } else {
      const double t = out.sounding.t.back();
      out.sounding.add(p, t, dew_point_at_rh(t, 0.1));
    }
  }
  return out;
}

// Profile "pseudo-latent": a saturated surface level on the pseudo-adiabat
// theta_A + 0.3 K; a warm, dry layer (RH 30 %) from 975 to 875 hPa on theta_A + 4 K
// (the surface parcel is about 4 K colder there: a large negative area, CIN of order
// Rd * 4 K * ln(1000/860) ~ 170 J/kg); at 850 hPa and above the "surface-based"
// upper profile (theta_A + 0.025 K/hPa (850 - p), RH 50 %). The parcel is warmer
// than its surroundings only in a thin layer around 850 hPa (a few tenths of a
// kelvin over a few tens of hPa): a small CAPE. CAPE <= CIN: pseudo-latent.
Sounding pseudo_latent() {
  Sounding s = surface_based();
  for (size_t k = 0; k < s.p_hpa.size(); ++k) {
    const double p = s.p_hpa[k];
    if (p == 1000.0) {
      s.t[k] = s.td[k] = on_adiabat(kThetaA + 0.3, p);
    } else if (p >= 875.0) {
      s.t[k] = on_adiabat(kThetaA + 4.0, p);
      s.td[k] = dew_point_at_rh(s.t[k], 0.3);
    }
  }
  return s;
}

const BuoyancyMode kModes[] = {BuoyancyMode::virtual_temperature, BuoyancyMode::temperature};

// ============================================================ absolutely stable

void expect_no_latent_instability(const ColumnResult& r, const OwnedColumn& c) {
  for (int k = 0; k < c.n(); ++k) EXPECT_NE(r.levels.latent_flag[k], 1) << "level " << c.pressure_pa[k];
  // Kernel behaviour (METHODS silent): an analysed column without a layer has depth 0
  // (hPa and m) and missing bottom/top.
  EXPECT_EQ(r.latent_layer_depth_pa, 0.0);
  EXPECT_EQ(r.latent_layer_depth_z_m, 0.0);
  EXPECT_TRUE(std::isnan(r.latent_layer_bottom_pa));
  EXPECT_TRUE(std::isnan(r.latent_layer_top_pa));
  // METHODS: no LFC -> CAPE 0, CIN, LFC, EL and lift missing; class none.
  EXPECT_EQ(r.mu_cape_j_kg, 0.0);
  EXPECT_TRUE(std::isnan(r.mu_cin_j_kg));
  EXPECT_TRUE(std::isnan(r.mu_lfc_pressure_pa));
  EXPECT_TRUE(std::isnan(r.mu_el_pressure_pa));
  EXPECT_TRUE(std::isnan(r.mu_lift_to_lfc_pa));
  EXPECT_TRUE(std::isnan(r.mu_lift_to_lfc_z_m));
  EXPECT_TRUE(std::isnan(r.easiest_lift_pa));
  EXPECT_TRUE(std::isnan(r.easiest_lift_pressure_pa));
  EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::none));
}

TEST(KnownProfiles, IsothermalColumnHasNoLatentInstability) {
  const OwnedColumn c = stable_isothermal().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    expect_no_latent_instability(r, c);
  }
}

TEST(KnownProfiles, IsothermalColumnTouchesTangentAdiabatAtItsBase) {
  // theta_w labels the temperature at 1000 hPa, so the pseudo-adiabat through
  // (240 K, 1000 hPa) is theta_w = 240 K, and an isothermal column is tangent there.
  const OwnedColumn c = stable_isothermal().column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_NEAR(r.tangent_theta_w_k, kIsothermalK, kTableTolK);
  EXPECT_EQ(r.tangent_pressure_pa, 100000.0);
}

TEST(KnownProfiles, StrongInversionHasNoLatentInstability) {
  const OwnedColumn c = stable_inversion().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    expect_no_latent_instability(r, c);
  }
}

// ============================================================ surface-based layer

TEST(KnownProfiles, SurfaceBasedLayerFlagsExactlyTheMoistBoundaryLayer) {
  const Sounding s = surface_based();
  const OwnedColumn c = s.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    for (int k = 0; k < c.n(); ++k)
      EXPECT_EQ(r.levels.latent_flag[k], s.p_hpa[k] >= 925.0 ? 1 : 0) << "level " << s.p_hpa[k] << " hPa";
  }
}

TEST(KnownProfiles, SurfaceBasedLayerTangentIsTheConstructedAdiabat) {
  const OwnedColumn c = surface_based().column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::temperature));
  EXPECT_NEAR(r.tangent_theta_w_k, kThetaA, kTableTolK);
  EXPECT_EQ(r.tangent_pressure_pa, 85000.0);
}

TEST(KnownProfiles, SurfaceBasedLayerThetaWOfSaturatedLevelsIsTheirAdiabat) {
  const Sounding s = surface_based();
  const OwnedColumn c = s.column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::temperature));
  const double bl[] = {2.0, 1.5, 1.0, 0.5};
  for (int k = 0; k < 4; ++k) {
    EXPECT_NEAR(r.levels.wet_bulb_potential_temperature_k[k], kThetaA + bl[k], kTableTolK);
    EXPECT_NEAR(r.levels.saturation_theta_w_k[k], kThetaA + bl[k], kTableTolK);
    // saturated: Td = Tw = T
    EXPECT_NEAR(r.levels.wet_bulb_temperature_k[k], s.t[k], kTableTolK);
  }
}

TEST(KnownProfiles, SurfaceBasedLayerExcessOfTopMoistLevelIsAdiabatGapAtTangent) {
  // Temperature mode: the 925 hPa parcel rides theta_A + 0.5 K; it is colder than the
  // environment at 900/875 hPa (theta_A + 1) and warmest relative to it at the tangent
  // point, 850 hPa, where the environment sits on theta_A. The excess there is the gap
  // between the two reference adiabats at 850 hPa; the kernel may find a maximum a
  // hair higher (the adiabat bows above the environment's chord; METHODS: a few
  // hundredths of a kelvin) and uses table look-ups (0.02 K).
  const Sounding s = surface_based();
  const OwnedColumn c = s.column();
  ColumnAnalyzer a(settings_for(BuoyancyMode::temperature));
  ColumnResult r;
  a.analyze(c.view(), r);
  const double expected = on_adiabat(kThetaA + 0.5, 850.0) - on_adiabat(kThetaA, 850.0);
  const ParcelAscent asc = a.ascent_from_level(s.index_of(925.0));
  EXPECT_GE(asc.max_excess_k, expected - 2 * kTableTolK);
  EXPECT_LE(asc.max_excess_k, expected + 0.05);
}

TEST(KnownProfiles, SurfaceBasedLayerStartsAtLowestLevel) {
  const OwnedColumn c = surface_based().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    // METHODS: starts at the lowest above-ground level (up to rounding of ln p and back)
    EXPECT_NEAR(r.latent_layer_bottom_pa, 100000.0, 1e-6);
  }
}

TEST(KnownProfiles, SurfaceBasedLayerTopIsWhereExcessCrossesThreshold) {
  // The top lies between 925 hPa (last flagged) and 900 hPa (first unflagged), at
  // the ln p interpolation of their maximum excesses to min_excess_k (METHODS).
  const Sounding s = surface_based();
  const OwnedColumn c = s.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    ColumnAnalyzer a(settings_for(mode));
    ColumnResult r;
    a.analyze(c.view(), r);
    const ParcelAscent flagged = a.ascent_from_level(s.index_of(925.0));
    const ParcelAscent other = a.ascent_from_level(s.index_of(900.0));
    const double expected = crossing_pa(92500.0, flagged.max_excess_k, 90000.0, other.max_excess_k,
                                        a.settings().min_excess_k);
    EXPECT_GT(r.latent_layer_top_pa, 90000.0);
    EXPECT_LT(r.latent_layer_top_pa, 92500.0);
    EXPECT_NEAR(r.latent_layer_top_pa, expected, 1.0);  // Pa
    EXPECT_NEAR(r.latent_layer_depth_pa, 100000.0 - expected, 1.0);
    // depth in metres: heights linear in ln p (METHODS)
    EXPECT_NEAR(r.latent_layer_depth_z_m, height_at(c, expected) - height_at(c, 100000.0), 0.5);
  }
}

TEST(KnownProfiles, SurfaceBasedMostUnstableParcelIsTheSurface) {
  const OwnedColumn c = surface_based().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    EXPECT_EQ(r.mu_pressure_pa, 100000.0);
    EXPECT_NEAR(r.mu_theta_w_k, kThetaA + 2.0, kTableTolK);
    // Saturated at its source and warmer than the environment right above it: LFC at
    // the source (no lift needed), no negative area below it.
    EXPECT_NEAR(r.mu_lfc_pressure_pa, 100000.0, 50.0);
    EXPECT_LT(r.mu_lift_to_lfc_pa, 50.0);
    EXPECT_LT(r.mu_cin_j_kg, 0.5);
    // every boundary-layer parcel is saturated and buoyant right above its source
    EXPECT_LT(r.easiest_lift_pa, 50.0);
  }
}

TEST(KnownProfiles, SurfaceBasedEquilibriumLevelIsWhereEnvironmentReachesParcelAdiabat) {
  // Temperature mode: theta_A + 0.025 (850 - p) = theta_A + 2 at p = 770 hPa; the
  // environment between levels is the chord of its adiabats, a little colder than
  // the curve, which moves the crossing up by a fraction of a hPa.
  const OwnedColumn c = surface_based().column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::temperature));
  EXPECT_NEAR(r.mu_el_pressure_pa, 77000.0, 300.0);
}

/// CAPE (J/kg) of the parcel on pseudo-adiabat theta_w from its saturated source at
/// p_source, computed independently: Rd * integral of the positive buoyancy d(ln p)
/// on 4000 steps from the source to the analysis top, parcel temperature from the
/// reference integrator, environment T and mixing ratio linear in ln p between levels
/// (METHODS "Parcels"), virtual temperatures from thermo in virtual mode.
double independent_cape(const OwnedColumn& c, double theta_w, double p_source, double p_top, bool virt) {
  std::vector<double> r_env(c.n());
  for (int k = 0; k < c.n(); ++k)
    r_env[k] = th::mixing_ratio(th::saturation_vapour_pressure_pa(c.humidity[k]), c.pressure_pa[k]);
  const int steps = 4000;
  const double l0 = std::log(p_source), l1 = std::log(p_top);
  double t_parcel = pseudoadiabat::reference_temperature_k(theta_w, p_source);
  double p_prev = p_source, total = 0.0;
  for (int i = 0; i < steps; ++i) {
    const double lnp = l0 + (l1 - l0) * (i + 0.5) / steps;
    const double p = std::exp(lnp);
    t_parcel = pseudoadiabat::reference_follow_k(t_parcel, p_prev, p);
    p_prev = p;
    int k = 0;
    while (k + 2 < c.n() && c.pressure_pa[k + 1] > p) ++k;
    const double s = std::log(c.pressure_pa[k] / p) / std::log(c.pressure_pa[k] / c.pressure_pa[k + 1]);
    const double te = c.temp_k[k] + s * (c.temp_k[k + 1] - c.temp_k[k]);
    const double re = r_env[k] + s * (r_env[k + 1] - r_env[k]);
    double b = t_parcel - te;
    if (virt)
      b = th::virtual_temperature_k(t_parcel, th::saturation_mixing_ratio(t_parcel, p)) -
          th::virtual_temperature_k(te, re);
    if (b > 0) total += b * (l0 - l1) / steps;
  }
  return th::kRd * total;
}

TEST(KnownProfiles, SurfaceBasedCapeMatchesIndependentIntegration) {
  // Table look-ups (0.02 K at worst) over a mean excess of about 1 K could cost 2 %;
  // the kernel must do better than METHODS' 0.5 % integration bound here.
  const OwnedColumn c = surface_based().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    const double expected = independent_cape(c, kThetaA + 2.0, 100000.0, 10000.0,
                                             mode == BuoyancyMode::virtual_temperature);
    EXPECT_GT(expected, 50.0);
    EXPECT_NEAR(r.mu_cape_j_kg, expected, 0.005 * expected);
    std::printf("[ cape ] surface-based profile, mode %s: kernel %.2f J/kg, independent %.2f J/kg\n",
                to_string(mode), r.mu_cape_j_kg, expected);
  }
}

TEST(KnownProfiles, SurfaceBasedParcelIsRealLatent) {
  // Normand: CAPE > CIN (here CIN ~ 0) -> real latent instability.
  const OwnedColumn c = surface_based().column();
  for (BuoyancyMode mode : kModes) {
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::real_latent)) << to_string(mode);
  }
}

// ============================================================ elevated layer

TEST(KnownProfiles, ElevatedLayerFlagsExactlyTheSaturatedLayerAboveTheInversion) {
  const Sounding s = elevated();
  const OwnedColumn c = s.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    for (int k = 0; k < c.n(); ++k) {
      const bool moist = s.p_hpa[k] <= 875.0 && s.p_hpa[k] >= 825.0;
      EXPECT_EQ(r.levels.latent_flag[k], moist ? 1 : 0) << "level " << s.p_hpa[k] << " hPa";
    }
  }
}

TEST(KnownProfiles, ElevatedLayerBoundsAreExcessCrossingsAroundTheMoistLayer) {
  const Sounding s = elevated();
  const OwnedColumn c = s.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    ColumnAnalyzer a(settings_for(mode));
    ColumnResult r;
    a.analyze(c.view(), r);
    const double min_ex = a.settings().min_excess_k;
    const ParcelAscent a900 = a.ascent_from_level(s.index_of(900.0));
    const ParcelAscent a875 = a.ascent_from_level(s.index_of(875.0));
    const ParcelAscent a825 = a.ascent_from_level(s.index_of(825.0));
    const ParcelAscent a800 = a.ascent_from_level(s.index_of(800.0));
    const double bottom = crossing_pa(87500.0, a875.max_excess_k, 90000.0, a900.max_excess_k, min_ex);
    const double top = crossing_pa(82500.0, a825.max_excess_k, 80000.0, a800.max_excess_k, min_ex);
    EXPECT_GT(r.latent_layer_bottom_pa, 87500.0);
    EXPECT_LT(r.latent_layer_bottom_pa, 90000.0);
    EXPECT_GT(r.latent_layer_top_pa, 80000.0);
    EXPECT_LT(r.latent_layer_top_pa, 82500.0);
    EXPECT_NEAR(r.latent_layer_bottom_pa, bottom, 1.0);
    EXPECT_NEAR(r.latent_layer_top_pa, top, 1.0);
    EXPECT_NEAR(r.latent_layer_depth_pa, bottom - top, 2.0);
  }
}

TEST(KnownProfiles, ElevatedMostUnstableParcelIsAboveTheInversion) {
  const OwnedColumn c = elevated().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    EXPECT_EQ(r.mu_pressure_pa, 87500.0);
    EXPECT_NEAR(r.mu_theta_w_k, kThetaB + 1.5, kTableTolK);
    EXPECT_LT(r.mu_lift_to_lfc_pa, 50.0);
    // the saturated parcels of 875-825 hPa all need (almost) no lift
    EXPECT_LE(r.easiest_lift_pressure_pa, 87500.0);
    EXPECT_GE(r.easiest_lift_pressure_pa, 82500.0);
    EXPECT_LT(r.easiest_lift_pa, 50.0);
  }
}

TEST(KnownProfiles, ElevatedColumnTangentIsTheColdSurface) {
  const OwnedColumn c = elevated().column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_NEAR(r.tangent_theta_w_k, kThetaB - 5.0, kTableTolK);
  EXPECT_EQ(r.tangent_pressure_pa, 100000.0);
}

// ============================================================ choosing the most-unstable parcel

/// theta_w, K, of air (T, Td) at p_pa computed outside the kernel: Bolton (1980) LCL, then
/// the reference pseudo-adiabat (accurate ODE integration) from the LCL to 1000 hPa.
double reference_theta_w(double t, double td, double p_pa) {
  return pseudoadiabat::reference_theta_w_k(std::min(th::lcl_temperature_k(t, td), t),
                                            std::min(lcl_pa(t, td, p_pa), p_pa));
}

AnalysisSettings with_rule(BuoyancyMode mode, MuParcelRule rule) {
  AnalysisSettings s = settings_for(mode);
  s.mu_parcel = rule;
  return s;
}

// Profile "capped": the "surface-based" profile (a saturated, latently unstable surface
// layer, 1000-925 hPa, surface parcel theta_A + 2 K) with the top level of the source
// layer, 700 hPa, made a warm, dry cap: on the pseudo-adiabat theta_A + 8 K, with the
// dew point that gives it theta_w = theta_A + 3 K, above every surface parcel's. Its LCL
// lies above 700 hPa, where theta_w_star is theta_A + 5 K and more, so the cap parcel is
// never buoyant. The largest theta_w is the cap; the largest CAPE is the surface parcel
// (the most buoyant of the saturated surface parcels, the lowest LCL).
constexpr double kCapThetaW = kThetaA + 3.0;

Sounding capped() {
  Sounding s = surface_based();
  const int k = s.index_of(700.0);
  s.t[k] = on_adiabat(kThetaA + 8.0, 700.0);
  // theta_w grows with the dew point
  s.td[k] = dew_point_where([&](double td) { return reference_theta_w(s.t[k], td, 70000.0); }, kCapThetaW,
                            200.0, s.t[k]);
  return s;
}

TEST(KnownProfiles, CappedColumnCapeRuleChoosesTheLatentlyUnstableSurfaceParcel) {
  const OwnedColumn c = capped().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), with_rule(mode, MuParcelRule::max_cape));
    EXPECT_EQ(r.mu_pressure_pa, 100000.0);
    EXPECT_NEAR(r.mu_theta_w_k, kThetaA + 2.0, kTableTolK);
    EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::real_latent));
    const double expected = independent_cape(c, kThetaA + 2.0, 100000.0, 10000.0,
                                             mode == BuoyancyMode::virtual_temperature);
    EXPECT_NEAR(r.mu_cape_j_kg, expected, 0.005 * expected);
  }
}

TEST(KnownProfiles, CappedColumnThetaWRuleChoosesTheDryCapWithoutLfc) {
  // The equivalent-potential-temperature convention (mu_parcel = max_theta_w) picks the
  // cap: class none and CAPE 0 although the surface layer is latently unstable.
  const OwnedColumn c = capped().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), with_rule(mode, MuParcelRule::max_theta_w));
    EXPECT_EQ(r.mu_pressure_pa, 70000.0);
    EXPECT_NEAR(r.mu_theta_w_k, kCapThetaW, kTableTolK);
    EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::none));
    EXPECT_EQ(r.mu_cape_j_kg, 0.0);
    EXPECT_TRUE(std::isnan(r.mu_lfc_pressure_pa));
    EXPECT_GT(r.latent_layer_depth_pa, 0.0);  // the layer fields do not depend on the rule
  }
}

// Profile "elevated wins": surface air at 1000 hPa, 303 K, with the dew point that puts its
// (Bolton) LCL at 800 hPa; theta_s is its theta_w. 975-875 hPa: 1.5 K colder than the
// surface parcel's dry adiabat, RH 30 % (dry, low theta_w). 850 hPa: saturated, on the
// pseudo-adiabat theta_s - 0.5 K. 825-700 hPa: RH 30 %, on theta_s - 2 K + 0.05 K/hPa
// (825 hPa - p); 675-250 hPa: on theta_s + 4.25 K + 0.01 K/hPa (700 hPa - p); above,
// isothermal and dry. The 850 hPa parcel is buoyant from its source to where theta_w_star
// = theta_s - 0.5 K (795 hPa, in temperature mode); the surface parcel, warmer by 0.5 K
// but saturated only at 800 hPa, from there to 785 hPa: the elevated parcel has the
// larger CAPE, the surface parcel the larger theta_w.
struct ElevatedWins {
  Sounding sounding;
  double theta_s, lcl_pa;
};

ElevatedWins elevated_wins() {
  const double t0 = 303.0, p0 = 100000.0;
  const double td0 = dew_point_for_lcl(t0, p0, 80000.0);
  const double kappa = th::poisson_kappa(th::mixing_ratio(th::saturation_vapour_pressure_pa(td0), p0));
  ElevatedWins out{{}, reference_theta_w(t0, td0, p0), lcl_pa(t0, td0, p0)};
  const double ts = out.theta_s;
  for (double p : levels_hpa()) {
    double t;
    if (p == 1000.0) {
      out.sounding.add(p, t0, td0);
    } else if (p >= 875.0) {
      t = t0 * std::pow(p / 1000.0, kappa) - 1.5;
      out.sounding.add(p, t, dew_point_at_rh(t, 0.3));
    } else if (p == 850.0) {
      t = on_adiabat(ts - 0.5, p);
      out.sounding.add(p, t, t);
    } else if (p >= 700.0) {
      t = on_adiabat(ts - 2.0 + 0.05 * (825.0 - p), p);
      out.sounding.add(p, t, dew_point_at_rh(t, 0.3));
    } else if (p >= 250.0) {
      t = on_adiabat(ts + 4.25 + 0.01 * (700.0 - p), p);
      out.sounding.add(p, t, dew_point_at_rh(t, 0.3));
    } else {
      t = out.sounding.t.back();
      out.sounding.add(p, t, dew_point_at_rh(t, 0.1));
    }
  }
  return out;
}

TEST(KnownProfiles, ElevatedParcelWithMoreCapeIsChosenOverWarmerSurfaceParcel) {
  const ElevatedWins e = elevated_wins();
  const Sounding& s = e.sounding;
  const OwnedColumn c = s.column();
  // construction checks: the surface has the largest theta_w of the source layer
  for (size_t k = 1; k < s.p_hpa.size() && s.p_hpa[k] >= 700.0; ++k)
    ASSERT_LT(reference_theta_w(s.t[k], s.td[k], s.p_hpa[k] * 100.0), e.theta_s - 0.4) << s.p_hpa[k] << " hPa";
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const bool virt = mode == BuoyancyMode::virtual_temperature;
    // CAPE of both parcels integrated independently (from the LCL up: METHODS, CAPE is the
    // positive area between LFC and EL, and nothing is buoyant between LCL and LFC)
    const double cape_850 = independent_cape(c, e.theta_s - 0.5, 85000.0, 10000.0, virt);
    const double cape_surface = independent_cape(c, e.theta_s, e.lcl_pa, 10000.0, virt);
    ASSERT_GT(cape_surface, 0.5);
    ASSERT_GT(cape_850, 2.0 * cape_surface);
    const ColumnResult r = analyze_column(c.view(), with_rule(mode, MuParcelRule::max_cape));
    EXPECT_EQ(r.mu_pressure_pa, 85000.0);
    EXPECT_NEAR(r.mu_theta_w_k, e.theta_s - 0.5, kTableTolK);
    EXPECT_NEAR(r.mu_cape_j_kg, cape_850, std::max(0.02 * cape_850, 0.5));
    std::printf("[ cape ] elevated-wins profile, mode %s: 850 hPa parcel %.2f J/kg (kernel %.2f), "
                "surface parcel %.2f J/kg\n", to_string(mode), cape_850, r.mu_cape_j_kg, cape_surface);
  }
}

TEST(KnownProfiles, ElevatedWinsColumnThetaWRuleChoosesTheSurfaceParcel) {
  const ElevatedWins e = elevated_wins();
  const OwnedColumn c = e.sounding.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), with_rule(mode, MuParcelRule::max_theta_w));
    EXPECT_EQ(r.mu_pressure_pa, 100000.0);
    EXPECT_NEAR(r.mu_theta_w_k, e.theta_s, kTableTolK);
    // flagged (buoyant at its LCL, METHODS), LFC at the LCL
    EXPECT_NEAR(r.mu_lfc_pressure_pa, e.lcl_pa, 100.0);
    EXPECT_GE(r.latent_class, static_cast<std::int8_t>(LatentClass::pseudo_latent));
  }
}

// ============================================================ superadiabatic surface layer

TEST(KnownProfiles, ExcessGainedOnlyBelowTheLclIsNotLatent) {
  const Sounding s = superadiabatic_dry();
  const OwnedColumn c = s.column();
  // construction check: the surface parcel IS warmer than the environment at 950 hPa
  const double kappa = th::poisson_kappa(th::mixing_ratio(th::saturation_vapour_pressure_pa(275.0), 1e5));
  ASSERT_GT(310.0 * std::pow(0.95, kappa) - s.t[s.index_of(950.0)], 0.5);
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    ColumnAnalyzer a(settings_for(mode));
    ColumnResult r;
    a.analyze(c.view(), r);
    const ParcelAscent asc = a.ascent_from_level(0);
    EXPECT_LT(asc.lcl_pressure_pa, 70000.0);
    EXPECT_LT(asc.max_excess_k, -5.0);
    EXPECT_FALSE(asc.flagged);
    expect_no_latent_instability(r, c);
  }
}

TEST(KnownProfiles, ParcelArrivingWarmAtItsLclIsFlaggedWithLfcAtLcl) {
  const WarmAtLcl w = warm_at_lcl();
  const OwnedColumn c = w.sounding.column();
  for (BuoyancyMode mode : kModes) {
    // (virtual mode: below the LCL parcel and environment share the mixing ratio, so
    // the parcel is as much warmer in virtual temperature as in temperature)
    SCOPED_TRACE(to_string(mode));
    ColumnAnalyzer a(settings_for(mode));
    ColumnResult r;
    a.analyze(c.view(), r);
    const ParcelAscent asc = a.ascent_from_level(0);
    EXPECT_NEAR(asc.lcl_pressure_pa, w.lcl_pa, 1.0);
    EXPECT_TRUE(asc.flagged);
    EXPECT_GT(asc.max_excess_k, 0.5);
    EXPECT_NEAR(asc.lfc_pressure_pa, asc.lcl_pressure_pa, 1e-6 * asc.lcl_pressure_pa);
    EXPECT_EQ(r.levels.latent_flag[0], 1);
  }
}

// ============================================================ deep instability

// Profile "deep": the environment lies on pseudo-adiabats that get colder upward all
// the way to the analysis top, theta_w_star = 295.15 K - 0.005 K/hPa (1000 hPa - p),
// saturated at 1000 hPa and RH 90 % above. Every parcel of the source layer has a
// theta_w above the theta_w_star of the top (290.65 K) and is flagged, so the layer
// runs through the whole source layer and ends at its last level, 700 hPa (METHODS:
// "a layer that reaches the edge of the source layer ends at its last level"); the
// surface parcel (theta_w 295.15 K) is still buoyant at the top, so its EL is the top
// and its CAPE is truncated there.
constexpr double kThetaDeep = 295.15;

Sounding deep() {
  Sounding s;
  for (double p : levels_hpa()) {
    const double t = on_adiabat(kThetaDeep - 0.005 * (1000.0 - p), p);
    s.add(p, t, p == 1000.0 ? t : dew_point_at_rh(t, 0.9));
  }
  return s;
}

TEST(KnownProfiles, LayerReachingSourceLayerEdgeEndsAtItsLastLevel) {
  const Sounding s = deep();
  const OwnedColumn c = s.column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    for (int k = 0; k < c.n(); ++k)
      if (s.p_hpa[k] >= 700.0) EXPECT_EQ(r.levels.latent_flag[k], 1) << "level " << s.p_hpa[k];
    EXPECT_NEAR(r.latent_layer_bottom_pa, 100000.0, 1e-6);
    EXPECT_NEAR(r.latent_layer_top_pa, 70000.0, 1e-6);
    EXPECT_NEAR(r.latent_layer_depth_pa, 30000.0, 1e-6);
  }
}

TEST(KnownProfiles, ParcelStillBuoyantAtTopHasItsElAtTheTop) {
  const OwnedColumn c = deep().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const AnalysisSettings st = settings_for(mode);
    const ColumnResult r = analyze_column(c.view(), st);
    EXPECT_EQ(r.mu_pressure_pa, 100000.0);
    EXPECT_NEAR(r.mu_el_pressure_pa, st.top_pressure_pa, 1e-6);
    const double expected = independent_cape(c, kThetaDeep, 100000.0, st.top_pressure_pa,
                                             mode == BuoyancyMode::virtual_temperature);
    EXPECT_NEAR(r.mu_cape_j_kg, expected, 0.005 * expected);
    std::printf("[ cape ] deep profile, mode %s: kernel %.1f J/kg, independent %.1f J/kg (truncated at the top)\n",
                to_string(mode), r.mu_cape_j_kg, expected);
  }
}

TEST(KnownProfiles, LowerAnalysisTopTruncatesCape) {
  // The same parcel with the analysis top at 300 hPa: EL at 300 hPa, CAPE integrated
  // to 300 hPa only.
  const OwnedColumn c = deep().column();
  AnalysisSettings st = settings_for(BuoyancyMode::temperature);
  st.top_pressure_pa = 30000.0;
  const ColumnResult r = analyze_column(c.view(), st);
  EXPECT_NEAR(r.mu_el_pressure_pa, 30000.0, 1e-6);
  const double expected = independent_cape(c, kThetaDeep, 100000.0, 30000.0, false);
  EXPECT_NEAR(r.mu_cape_j_kg, expected, 0.005 * expected);
}

// ============================================================ below ground

/// The "surface-based" column with levels 1000 and 975 hPa made unusable in one of
/// three ways; the two below-ground levels keep (extrapolated-looking) values.
OwnedColumn below_ground_by_surface_pressure(double ps_pa) {
  OwnedColumn c = surface_based().column();
  c.surface_pressure_pa = ps_pa;
  return c;
}

OwnedColumn below_ground_by_nan() {
  OwnedColumn c = surface_based().column();
  for (int k = 0; k < 2; ++k) c.temp_k[k] = c.humidity[k] = c.height_m[k] = kNaN;
  return c;
}

OwnedColumn trimmed_above_ground() {
  OwnedColumn c = surface_based().column();
  for (auto* v : {&c.pressure_pa, &c.temp_k, &c.humidity, &c.height_m}) v->erase(v->begin(), v->begin() + 2);
  return c;
}

void expect_same_outputs(const ColumnResult& a, const ColumnResult& b) {
  auto same = [](double x, double y) { return (std::isnan(x) && std::isnan(y)) || x == y; };
  EXPECT_PRED2(same, a.latent_layer_depth_pa, b.latent_layer_depth_pa);
  EXPECT_PRED2(same, a.latent_layer_depth_z_m, b.latent_layer_depth_z_m);
  EXPECT_PRED2(same, a.latent_layer_bottom_pa, b.latent_layer_bottom_pa);
  EXPECT_PRED2(same, a.latent_layer_top_pa, b.latent_layer_top_pa);
  EXPECT_PRED2(same, a.tangent_theta_w_k, b.tangent_theta_w_k);
  EXPECT_PRED2(same, a.tangent_pressure_pa, b.tangent_pressure_pa);
  EXPECT_PRED2(same, a.mu_pressure_pa, b.mu_pressure_pa);
  EXPECT_PRED2(same, a.mu_theta_w_k, b.mu_theta_w_k);
  EXPECT_PRED2(same, a.mu_cape_j_kg, b.mu_cape_j_kg);
  EXPECT_PRED2(same, a.mu_cin_j_kg, b.mu_cin_j_kg);
  EXPECT_PRED2(same, a.mu_lfc_pressure_pa, b.mu_lfc_pressure_pa);
  EXPECT_PRED2(same, a.mu_el_pressure_pa, b.mu_el_pressure_pa);
  EXPECT_PRED2(same, a.mu_lift_to_lfc_pa, b.mu_lift_to_lfc_pa);
  EXPECT_PRED2(same, a.mu_lift_to_lfc_z_m, b.mu_lift_to_lfc_z_m);
  EXPECT_PRED2(same, a.easiest_lift_pa, b.easiest_lift_pa);
  EXPECT_PRED2(same, a.easiest_lift_pressure_pa, b.easiest_lift_pressure_pa);
  EXPECT_EQ(a.latent_class, b.latent_class);
}

TEST(KnownProfiles, LevelsBelowSurfacePressureAreExcluded) {
  const ColumnResult trimmed = analyze_column(trimmed_above_ground().view(), settings_for(BuoyancyMode::virtual_temperature));
  const ColumnResult r = analyze_column(below_ground_by_surface_pressure(96000.0).view(),
                                        settings_for(BuoyancyMode::virtual_temperature));
  expect_same_outputs(r, trimmed);
  // surface-based: starts at the lowest above-ground level
  EXPECT_NEAR(r.latent_layer_bottom_pa, 95000.0, 1e-6);
}

TEST(KnownProfiles, LevelsBelowSurfacePressureAreMissingInLevelFields) {
  const ColumnResult r = analyze_column(below_ground_by_surface_pressure(96000.0).view(),
                                        settings_for(BuoyancyMode::virtual_temperature));
  for (int k = 0; k < 2; ++k) {
    EXPECT_TRUE(std::isnan(r.levels.wet_bulb_temperature_k[k]));
    EXPECT_TRUE(std::isnan(r.levels.wet_bulb_potential_temperature_k[k]));
    EXPECT_TRUE(std::isnan(r.levels.saturation_theta_w_k[k]));
    EXPECT_TRUE(std::isnan(r.levels.max_parcel_excess_k[k]));
    EXPECT_TRUE(std::isnan(r.levels.dew_point_k[k]));
    EXPECT_EQ(r.levels.latent_flag[k], kByteMissing);
    EXPECT_EQ(r.levels.stability_class[k], kByteMissing);
    EXPECT_EQ(r.levels.potential_instability[k], kByteMissing);
  }
  EXPECT_TRUE(std::isfinite(r.levels.wet_bulb_temperature_k[2]));
  EXPECT_EQ(r.levels.latent_flag[2], 1);
}

TEST(KnownProfiles, LevelAtExactlySurfacePressureIsAboveGround) {
  // METHODS: levels whose pressure EXCEEDS the surface pressure are below ground.
  const ColumnResult r = analyze_column(below_ground_by_surface_pressure(97500.0).view(),
                                        settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_NEAR(r.latent_layer_bottom_pa, 97500.0, 1e-6);
  EXPECT_TRUE(std::isfinite(r.levels.wet_bulb_temperature_k[1]));
}

TEST(KnownProfiles, BelowGroundMarkedOnlyByMissingValuesIsExcluded) {
  const ColumnResult trimmed = analyze_column(trimmed_above_ground().view(), settings_for(BuoyancyMode::virtual_temperature));
  const ColumnResult r = analyze_column(below_ground_by_nan().view(), settings_for(BuoyancyMode::virtual_temperature));
  expect_same_outputs(r, trimmed);
  EXPECT_TRUE(std::isnan(r.levels.saturation_theta_w_k[0]));
}

// ============================================================ too few levels

TEST(KnownProfiles, ColumnWithTwoUsableLevelsIsSkippedWithAllOutputsMissing) {
  OwnedColumn c = surface_based().column();
  for (int k = 2; k < c.n(); ++k) c.temp_k[k] = kNaN;
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_EQ(r.qc.columns_skipped, 1);
  EXPECT_EQ(r.qc.columns_analysed, 0);
  for (double v : {r.latent_layer_depth_pa, r.latent_layer_depth_z_m, r.latent_layer_bottom_pa,
                   r.latent_layer_top_pa, r.tangent_theta_w_k, r.tangent_pressure_pa, r.mu_pressure_pa,
                   r.mu_theta_w_k, r.mu_cape_j_kg, r.mu_cin_j_kg, r.mu_lfc_pressure_pa,
                   r.mu_el_pressure_pa, r.mu_lift_to_lfc_pa, r.mu_lift_to_lfc_z_m, r.easiest_lift_pa,
                   r.easiest_lift_pressure_pa})
    EXPECT_TRUE(std::isnan(v));
  EXPECT_EQ(r.latent_class, kByteMissing);
  for (int k = 0; k < c.n(); ++k) {
    EXPECT_TRUE(std::isnan(r.levels.wet_bulb_potential_temperature_k[k]));
    EXPECT_EQ(r.levels.latent_flag[k], kByteMissing);
  }
}

TEST(KnownProfiles, ColumnWithThreeUsableLevelsIsAnalysed) {
  OwnedColumn c = surface_based().column();
  for (int k = 3; k < c.n(); ++k) c.temp_k[k] = kNaN;
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_EQ(r.qc.columns_analysed, 1);
  EXPECT_EQ(r.qc.columns_skipped, 0);
  EXPECT_TRUE(std::isfinite(r.mu_theta_w_k));
}

TEST(KnownProfiles, EmptyColumnIsSkipped) {
  ColumnInput in;  // n_levels = 0
  const ColumnResult r = analyze_column(in, settings_for(BuoyancyMode::virtual_temperature, false));
  EXPECT_EQ(r.qc.columns_skipped, 1);
  EXPECT_TRUE(std::isnan(r.mu_theta_w_k));
}

// ============================================================ quality control

/// The surface-based column with humidity given as relative humidity (fraction).
OwnedColumn as_relative_humidity(OwnedColumn c) {
  for (int k = 0; k < c.n(); ++k)
    c.humidity[k] = th::saturation_vapour_pressure_pa(c.humidity[k]) / th::saturation_vapour_pressure_pa(c.temp_k[k]);
  c.humidity_kind = HumidityKind::relative_humidity;
  return c;
}

/// ... as specific humidity (kg/kg).
OwnedColumn as_specific_humidity(OwnedColumn c) {
  for (int k = 0; k < c.n(); ++k) {
    const double e = th::saturation_vapour_pressure_pa(c.humidity[k]);
    const double p = c.pressure_pa[k];
    c.humidity[k] = th::kEps * e / (p - (1.0 - th::kEps) * e);
  }
  c.humidity_kind = HumidityKind::specific_humidity;
  return c;
}

TEST(KnownProfiles, RelativeHumidityAbove100PercentIsClippedAndCounted) {
  OwnedColumn base = as_relative_humidity(surface_based().column());
  const int k = 10;
  base.humidity[k] = 1.0;
  OwnedColumn over = base;
  over.humidity[k] = 1.05;
  const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
  const ColumnResult r0 = analyze_column(base.view(), s), r1 = analyze_column(over.view(), s);
  EXPECT_EQ(r0.qc.humidity_clipped, 0);
  EXPECT_EQ(r1.qc.humidity_clipped, 1);
  expect_same_outputs(r1, r0);
  EXPECT_DOUBLE_EQ(r1.levels.dew_point_k[k], base.temp_k[k]);
}

TEST(KnownProfiles, SpecificHumidityAboveSaturationIsClippedAndCounted) {
  OwnedColumn base = as_specific_humidity(surface_based().column());
  const int k = 10;
  OwnedColumn over = base;
  const double es = th::saturation_vapour_pressure_pa(base.temp_k[k]), p = base.pressure_pa[k];
  base.humidity[k] = th::kEps * es / (p - (1.0 - th::kEps) * es);  // exactly saturated
  over.humidity[k] = 1.1 * base.humidity[k];
  const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
  const ColumnResult r0 = analyze_column(base.view(), s), r1 = analyze_column(over.view(), s);
  EXPECT_EQ(r1.qc.humidity_clipped, r0.qc.humidity_clipped + 1);
  EXPECT_NEAR(r1.levels.dew_point_k[k], base.temp_k[k], 1e-6);
  EXPECT_NEAR(r1.mu_cape_j_kg, r0.mu_cape_j_kg, 1e-6 * (1.0 + r0.mu_cape_j_kg));
}

TEST(KnownProfiles, NegativeSpecificHumidityIsClippedAndCounted) {
  OwnedColumn c = as_specific_humidity(surface_based().column());
  c.humidity[12] = -1e-5;
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_EQ(r.qc.humidity_clipped, 1);
  EXPECT_EQ(r.qc.columns_analysed, 1);
  EXPECT_TRUE(std::isfinite(r.levels.wet_bulb_temperature_k[12]));
}

TEST(KnownProfiles, DewPointAboveTemperatureIsSetToTemperatureAndCounted) {
  OwnedColumn base = surface_based().column();
  const int k = 10;
  base.humidity[k] = base.temp_k[k];
  OwnedColumn over = base;
  over.humidity[k] = base.temp_k[k] + 2.0;
  const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
  const ColumnResult r0 = analyze_column(base.view(), s), r1 = analyze_column(over.view(), s);
  EXPECT_EQ(r0.qc.dew_point_corrected, 0);
  EXPECT_EQ(r1.qc.dew_point_corrected, 1);
  EXPECT_DOUBLE_EQ(r1.levels.dew_point_k[k], base.temp_k[k]);
  expect_same_outputs(r1, r0);
}

TEST(KnownProfiles, TemperatureOutside150To350KIsRejectedAndCounted) {
  for (double bad : {140.0, 360.0}) {
    SCOPED_TRACE(bad);
    OwnedColumn missing = surface_based().column();
    const int k = 12;
    missing.temp_k[k] = kNaN;
    OwnedColumn wrong = surface_based().column();
    wrong.temp_k[k] = bad;
    const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
    const ColumnResult r0 = analyze_column(missing.view(), s), r1 = analyze_column(wrong.view(), s);
    EXPECT_EQ(r0.qc.temperature_rejected, 0);
    EXPECT_EQ(r1.qc.temperature_rejected, 1);
    expect_same_outputs(r1, r0);
    EXPECT_TRUE(std::isnan(r1.levels.wet_bulb_temperature_k[k]));
    EXPECT_EQ(r1.levels.latent_flag[k], kByteMissing);
  }
}

TEST(KnownProfiles, NonFiniteHumidityMakesLevelUnusable) {
  // METHODS: levels that hold missing values are unusable and excluded. An infinite
  // specific humidity is no value either: the column must come out as if the level
  // were missing, not with NaN spread into the column outputs.
  OwnedColumn missing = as_specific_humidity(surface_based().column());
  OwnedColumn infinite = missing;
  const int k = 1;  // inside the source layer
  missing.humidity[k] = kNaN;
  infinite.humidity[k] = std::numeric_limits<double>::infinity();
  const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
  const ColumnResult r0 = analyze_column(missing.view(), s), r1 = analyze_column(infinite.view(), s);
  expect_same_outputs(r1, r0);
  EXPECT_TRUE(std::isfinite(r1.mu_theta_w_k));
}

// ============================================================ CAPE convergence, classes

TEST(KnownProfiles, CapeConvergesWhenSubstepsAreDoubled) {
  // METHODS: sub-steps fine enough that halving them changes CAPE by < 0.5 %. Checked
  // on the constructed profiles and on 500 random plausible columns.
  std::vector<OwnedColumn> columns = {surface_based().column(), elevated().column(),
                                      pseudo_latent().column(), warm_at_lcl().sounding.column()};
  std::mt19937 rng(7u);
  for (int i = 0; i < 500; ++i) columns.push_back(test::random_column(rng, test::era5_levels_hpa()));
  for (BuoyancyMode mode : kModes) {
    AnalysisSettings s = settings_for(mode, false);
    AnalysisSettings fine = s;
    fine.cape_substeps = 2 * s.cape_substeps;
    ColumnAnalyzer a(s), b(fine);
    ColumnResult r, rf;
    int checked = 0;
    double worst = 0.0;
    for (size_t i = 0; i < columns.size(); ++i) {
      a.analyze(columns[i].view(), r);
      b.analyze(columns[i].view(), rf);
      if (!(r.mu_cape_j_kg > 10.0)) continue;  // relative change of a tiny CAPE means nothing
      ++checked;
      const double rel = std::fabs(rf.mu_cape_j_kg - r.mu_cape_j_kg) / rf.mu_cape_j_kg;
      worst = std::max(worst, rel);
      EXPECT_LT(rel, 0.005) << "column " << i << " mode " << to_string(mode) << ": CAPE "
                            << r.mu_cape_j_kg << " vs " << rf.mu_cape_j_kg;
    }
    EXPECT_GT(checked, 20);
    std::printf("[ cape ] mode %s: %d columns with CAPE > 10 J/kg, largest change %.4f %%\n",
                to_string(mode), checked, 100.0 * worst);
  }
}

TEST(KnownProfiles, LargeCinSmallCapeIsPseudoLatent) {
  const OwnedColumn c = pseudo_latent().column();
  for (BuoyancyMode mode : kModes) {
    SCOPED_TRACE(to_string(mode));
    const ColumnResult r = analyze_column(c.view(), settings_for(mode));
    EXPECT_EQ(r.mu_pressure_pa, 100000.0);
    EXPECT_TRUE(std::isfinite(r.mu_lfc_pressure_pa));
    EXPECT_GT(r.mu_cape_j_kg, 0.0);
    EXPECT_GT(r.mu_cin_j_kg, 100.0);
    EXPECT_LT(r.mu_cape_j_kg, r.mu_cin_j_kg);
    EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::pseudo_latent));
  }
}

TEST(KnownProfiles, LiftToLfcIsPressureAndHeightDifferenceFromSource) {
  // METHODS: lift needed = source pressure - LFC pressure, and the same distance in
  // metres (geopotential height linear in ln p). The pseudo-latent profile's surface
  // parcel must be lifted through the warm layer to near 860 hPa.
  const OwnedColumn c = pseudo_latent().column();
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::temperature));
  ASSERT_TRUE(std::isfinite(r.mu_lfc_pressure_pa));
  EXPECT_GT(r.mu_lift_to_lfc_pa, 10000.0);
  EXPECT_LT(r.mu_lift_to_lfc_pa, 15000.0);
  EXPECT_NEAR(r.mu_lift_to_lfc_pa, 100000.0 - r.mu_lfc_pressure_pa, 1e-6);
  EXPECT_NEAR(r.mu_lift_to_lfc_z_m, height_at(c, r.mu_lfc_pressure_pa) - height_at(c, 100000.0), 0.5);
  EXPECT_NEAR(r.easiest_lift_pa, r.mu_lift_to_lfc_pa, 1e-6);  // the only flagged source level
}

TEST(KnownProfiles, MissingHeightsLeaveOnlyMetreOutputsMissing) {
  OwnedColumn c = surface_based().column();
  c.with_heights = false;
  const ColumnResult r = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_TRUE(std::isnan(r.latent_layer_depth_z_m));
  EXPECT_TRUE(std::isnan(r.mu_lift_to_lfc_z_m));
  EXPECT_GT(r.latent_layer_depth_pa, 0.0);
  EXPECT_TRUE(std::isfinite(r.mu_lift_to_lfc_pa));
}

TEST(KnownProfiles, NanSurfacePressureMeansNotGiven) {
  OwnedColumn c = surface_based().column();
  const ColumnResult r0 = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  c.surface_pressure_pa = kNaN;
  const ColumnResult r1 = analyze_column(c.view(), settings_for(BuoyancyMode::virtual_temperature));
  expect_same_outputs(r1, r0);
}

TEST(KnownProfiles, NoLfcIsClassNone) {
  const ColumnResult r = analyze_column(stable_isothermal().column().view(),
                                        settings_for(BuoyancyMode::virtual_temperature));
  EXPECT_EQ(r.latent_class, static_cast<std::int8_t>(LatentClass::none));
}

}  // namespace
}  // namespace latentlift
