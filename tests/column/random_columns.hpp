// Random, physically plausible model columns on ERA5-like pressure levels, for the
// column-kernel invariant tests and the kernel benchmark. Invented data (seeded
// std::mt19937): used to exercise invariants and timing, never as check values.
//
// A column is built bottom-up by hydrostatic integration of a piecewise lapse-rate
// profile (boundary layer, optional inversion, free troposphere, tropopause,
// stratosphere), with a relative-humidity profile turned into the chosen humidity
// quantity with Bolton's (1980, eq. 10) saturation vapour pressure.
#pragma once

#include <algorithm>
#include <cmath>
#include <limits>
#include <random>
#include <vector>

#include "latentlift/column.hpp"

namespace latentlift::test {

/// ERA5 pressure levels, hPa, bottom-up (37 levels, 1000 to 1 hPa).
inline const std::vector<double>& era5_levels_hpa() {
  static const std::vector<double> levels = {
      1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 700, 650,
      600,  550, 500, 450, 400, 350, 300, 250, 225, 200, 175, 150, 125,
      100,  70,  50,  30,  20,  10,  7,   5,   3,   2,   1};
  return levels;
}

/// The ERA5 levels from 1000 up to 100 hPa (27 levels).
inline std::vector<double> era5_levels_to_100_hpa() {
  std::vector<double> out;
  for (double p : era5_levels_hpa())
    if (p >= 100.0) out.push_back(p);
  return out;
}

/// One column with its own storage; view() gives the kernel's ColumnInput.
struct OwnedColumn {
  std::vector<double> pressure_pa, temp_k, humidity, height_m;
  HumidityKind humidity_kind = HumidityKind::specific_humidity;
  bool with_heights = true;
  double surface_pressure_pa = -1.0;

  ColumnInput view() const {
    ColumnInput in;
    in.n_levels = static_cast<int>(pressure_pa.size());
    in.pressure_pa = pressure_pa.data();
    in.temp_k = temp_k.data();
    in.humidity = humidity.data();
    in.humidity_kind = humidity_kind;
    in.height_m = with_heights ? height_m.data() : nullptr;
    in.surface_pressure_pa = surface_pressure_pa;
    return in;
  }
  int n() const { return static_cast<int>(pressure_pa.size()); }

  /// The same column with its levels in the opposite vertical order.
  OwnedColumn reversed() const {
    OwnedColumn out = *this;
    std::reverse(out.pressure_pa.begin(), out.pressure_pa.end());
    std::reverse(out.temp_k.begin(), out.temp_k.end());
    std::reverse(out.humidity.begin(), out.humidity.end());
    std::reverse(out.height_m.begin(), out.height_m.end());
    return out;
  }
};

namespace random_detail {
constexpr double kRd = 287.04;      // J kg-1 K-1 (Bolton 1980)
constexpr double kG = 9.80665;      // m s-2 (standard gravity)
constexpr double kEps = 287.04 / 461.5;

/// Bolton (1980, eq. 10), Pa, t in K.
inline double es_pa(double temp_k) {
  const double t = temp_k - 273.15;
  return 611.2 * std::exp(17.67 * t / (t + 243.5));
}
/// Exact inverse of Bolton eq. 10, K.
inline double dew_point_k(double e_pa) {
  const double x = std::log(e_pa / 611.2);
  return 273.15 + 243.5 * x / (17.67 - x);
}
}  // namespace random_detail

/// Options of the generator.
struct RandomColumnOptions {
  bool allow_missing = true;          // sprinkle NaN levels and below-ground NaN columns
  bool allow_surface_pressure = true; // surface pressure given, sometimes above levels
  bool allow_all_humidity_kinds = true;
  bool allow_random_order = true;     // half the columns top-down (as ERA5 files)
  bool allow_supersaturation = true;  // occasional RH slightly above 100 % (QC clips it)
};

/// A random plausible column on the given levels (hPa, bottom-up).
inline OwnedColumn random_column(std::mt19937& rng, const std::vector<double>& levels_hpa,
                                 const RandomColumnOptions& opt = {}) {
  using namespace random_detail;
  std::uniform_real_distribution<double> u01(0.0, 1.0);
  auto uni = [&](double a, double b) { return a + (b - a) * u01(rng); };
  const int n = static_cast<int>(levels_hpa.size());
  const double nan = std::numeric_limits<double>::quiet_NaN();

  // ---- temperature: lapse rates in K/km as a function of height above the 1000 hPa level
  const double t_bottom = uni(250.0, 305.0);
  const double bl_top_m = uni(0.0, 2000.0);
  double bl_lapse = uni(3.0, 10.5);                   // K/km; > 9.8 is superadiabatic
  if (u01(rng) < 0.1) bl_lapse = uni(9.8, 14.0);      // desert afternoon
  if (t_bottom < 275.0 && u01(rng) < 0.4) bl_lapse = uni(-20.0, -2.0);  // surface inversion
  const double ft_lapse = uni(4.5, 8.0);
  const bool inversion = u01(rng) < 0.35;
  const double inv_bottom_m = uni(200.0, 3000.0);
  const double inv_top_m = inv_bottom_m + uni(100.0, 800.0);
  const double inv_lapse = uni(-15.0, -1.0);
  const double trop_temp_k = uni(195.0, 225.0);
  const double strat_lapse_low = uni(-2.0, 0.5);
  const double strat_lapse_high = uni(-3.5, -1.5);

  std::vector<double> t(n), z(n);
  z[0] = uni(-100.0, 300.0);  // height of the 1000 hPa level
  t[0] = t_bottom;
  bool in_stratosphere = false;
  for (int k = 1; k < n; ++k) {
    const double dlnp = std::log(levels_hpa[k - 1] / levels_hpa[k]);
    double t_next = t[k - 1];
    double dz = 0.0;
    for (int pass = 0; pass < 3; ++pass) {
      dz = kRd * 0.5 * (t[k - 1] + t_next) / kG * dlnp;
      const double zmid = z[k - 1] - z[0] + 0.5 * dz;
      double lapse;
      if (in_stratosphere)
        lapse = levels_hpa[k] > 20.0 ? strat_lapse_low : strat_lapse_high;
      else if (inversion && zmid >= inv_bottom_m && zmid <= inv_top_m)
        lapse = inv_lapse;
      else if (zmid <= bl_top_m)
        lapse = bl_lapse;
      else
        lapse = ft_lapse;
      t_next = t[k - 1] - lapse * 1e-3 * dz;
    }
    if (!in_stratosphere && t_next < trop_temp_k) {
      t_next = trop_temp_k;
      in_stratosphere = true;
    }
    t[k] = std::clamp(t_next, 180.0, 290.0);
    z[k] = z[k - 1] + dz;
  }

  // ---- humidity: relative humidity (fraction) profile
  const double rh_bottom = u01(rng) < 0.1 ? 1.0 : uni(0.15, 1.0);
  const double rh_free = uni(0.05, 0.9);
  const bool moist_layer = u01(rng) < 0.3;
  const double moist_bottom_m = uni(500.0, 6000.0);
  const double moist_top_m = moist_bottom_m + uni(200.0, 2000.0);
  const double q_strat = uni(2e-6, 5e-6);
  std::vector<double> rh(n);
  for (int k = 0; k < n; ++k) {
    const double h = z[k] - z[0];
    double r;
    if (h <= bl_top_m)
      r = rh_bottom + uni(-0.05, 0.05);
    else
      r = rh_free + (rh_bottom - rh_free) * std::exp(-(h - bl_top_m) / 1500.0) + uni(-0.1, 0.1);
    if (moist_layer && h >= moist_bottom_m && h <= moist_top_m) r = uni(0.85, 1.0);
    r = std::clamp(r, 0.02, 1.0);
    if (t[k] <= trop_temp_k + 0.5 && levels_hpa[k] < 300.0) {
      // stratosphere: a few ppm of water vapour
      const double p_pa = levels_hpa[k] * 100.0;
      const double e = q_strat * p_pa / (kEps + (1.0 - kEps) * q_strat);
      r = std::min(1.0, e / es_pa(t[k]));
    }
    rh[k] = r;
  }
  if (opt.allow_supersaturation && u01(rng) < 0.03) rh[rng() % n] = uni(1.0, 1.04);

  OwnedColumn col;
  col.pressure_pa.resize(n);
  col.temp_k = t;
  col.height_m = z;
  col.humidity.resize(n);
  int kind = 0;
  if (opt.allow_all_humidity_kinds) kind = static_cast<int>(rng() % 4);
  col.humidity_kind = static_cast<HumidityKind>(kind);
  for (int k = 0; k < n; ++k) {
    const double p = levels_hpa[k] * 100.0;
    col.pressure_pa[k] = p;
    const double e = rh[k] * es_pa(t[k]);
    switch (col.humidity_kind) {
      case HumidityKind::specific_humidity:
        col.humidity[k] = kEps * e / (p - (1.0 - kEps) * e);
        break;
      case HumidityKind::mixing_ratio:
        col.humidity[k] = kEps * e / (p - e);
        break;
      case HumidityKind::relative_humidity:
        col.humidity[k] = rh[k];
        break;
      case HumidityKind::dew_point:
        col.humidity[k] = dew_point_k(e);  // above T where RH > 1 (QC corrects it)
        break;
    }
  }
  col.with_heights = u01(rng) > 0.1;

  // ---- surface pressure and missing values
  if (opt.allow_surface_pressure) {
    const double x = u01(rng);
    if (x < 0.3) {
      col.surface_pressure_pa = uni(985.0, 1035.0) * 100.0;
    } else if (x < 0.45) {
      col.surface_pressure_pa = uni(600.0, 980.0) * 100.0;  // mountains: levels below ground
    } else if (x < 0.5 && opt.allow_missing) {
      const double ps = uni(600.0, 980.0) * 100.0;          // below ground marked by NaN only
      for (int k = 0; k < n; ++k)
        if (col.pressure_pa[k] > ps) col.temp_k[k] = col.humidity[k] = col.height_m[k] = nan;
    }
  }
  if (opt.allow_missing && u01(rng) < 0.05) {
    const int k = static_cast<int>(rng() % n);
    col.temp_k[k] = nan;
  }
  if (opt.allow_random_order && u01(rng) < 0.5) col = col.reversed();
  return col;
}

}  // namespace latentlift::test
