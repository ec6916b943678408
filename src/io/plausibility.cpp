#include "io/plausibility.hpp"

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>

#include "latentlift/errors.hpp"
#include "latentlift/thermo.hpp"

namespace latentlift::io::detail {

namespace {

// Thresholds (README "Plausibility of the input" gives them with their sources).
constexpr double kMinPressurePa = 100.0;         // 1 hPa: top of the pressure coordinate (common practice for NWP levels)
constexpr double kMaxPressurePa = 110000.0;      // 1100 hPa: above any observed surface pressure (WMO record 1083.8 hPa)
constexpr double kMinSurfacePressurePa = 30000.0;   // 300 hPa: below the summit of the highest mountain (~314 hPa, ICAO standard atmosphere at 8849 m)
constexpr double kMinMedianTempK = 150.0;        // the kernel's QC range for one level (METHODS "Quality control")
constexpr double kMaxMedianTempK = 350.0;
constexpr double kMinMedianRh = 0.01;            // median relative humidity below 500 hPa: 1 % to 300 % (common
constexpr double kMaxMedianRh = 3.0;             // practice: wide, a unit error moves it by a factor 100 or 1000)
constexpr double kHumidityTopPa = 50000.0;       // humidity judged at levels from the ground up to 500 hPa
constexpr double kMinThicknessRatio = 0.5;       // measured / hypsometric thickness: within a few per cent in real
constexpr double kMaxThicknessRatio = 2.0;       // data; a factor 2 catches g (9.81) and 1000 (km/m) with room to spare
constexpr std::size_t kMinSamples = 10;          // fewer valid values than this: no judgement

const double kNaN = std::numeric_limits<double>::quiet_NaN();

std::string num(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.4g", value);
  return text;
}

double median(std::vector<double> values) {
  if (values.empty()) return kNaN;
  auto mid = values.begin() + static_cast<std::ptrdiff_t>(values.size() / 2);
  std::nth_element(values.begin(), mid, values.end());
  return *mid;
}

std::string quoted_units(const FieldOrigin& origin) {
  return "'" + shorten(origin.units) + "'";
}

[[noreturn]] void fail(const FieldOrigin& origin, const std::string& text) {
  throw InputError(origin.file, origin.variable, text);
}

double in_units(const FieldOrigin& origin, double si) {
  return origin.si_per_unit != 0.0 ? (si - origin.si_offset) / origin.si_per_unit : si;
}

/// "the values look N times too large for these units" when ratio (found / typical) is near a power of ten.
std::string factor_hint(double ratio) {
  for (double f : {1000.0, 100.0}) {
    if (ratio > f / 4 && ratio < f * 4) return ": the values look " + num(f) + " times too large for these units";
    if (ratio < 4 / f && ratio > 1 / (4 * f)) return ": the values look " + num(f) + " times too small for these units";
  }
  return "";
}

void check_temperature(const FieldOrigin& origin, const std::vector<double>& values, const char* quantity) {
  std::vector<double> valid;
  for (double v : values)
    if (std::isfinite(v)) valid.push_back(v);
  if (valid.size() < kMinSamples) return;
  const double m = median(valid);
  if (m >= kMinMedianTempK && m <= kMaxMedianTempK) return;
  const double shown = in_units(origin, m);
  std::string text = std::string(quantity) + " in " + quoted_units(origin) + " has a median of " + num(shown);
  if (shown >= kMinMedianTempK && shown <= kMaxMedianTempK)
    text += ": the values look like kelvin";
  else if (shown >= kMinMedianTempK - thermo::kZeroCelsiusK && shown <= kMaxMedianTempK - thermo::kZeroCelsiusK)
    text += ": the values look like degrees Celsius";
  else
    text += " (" + num(m) + " K): expected a median between 150 and 350 K";
  fail(origin, text);
}

const char* humidity_words(HumidityKind kind) {
  switch (kind) {
    case HumidityKind::specific_humidity: return "specific humidity";
    case HumidityKind::mixing_ratio: return "humidity mixing ratio";
    case HumidityKind::relative_humidity: return "relative humidity";
    case HumidityKind::dew_point: return "dew point temperature";
  }
  return "humidity";
}

void check_humidity(const ColumnSample& s) {
  const FieldOrigin& origin = s.humidity_origin;
  const std::size_t nz = s.pressure_pa.size();
  if (s.humidity_kind == HumidityKind::dew_point) {
    check_temperature(origin, s.humidity, "dew point temperature");
    return;
  }
  std::vector<double> rh;
  for (std::size_t c = 0; c < s.n_columns; ++c)
    for (std::size_t k = 0; k < nz; ++k) {
      const double p = s.pressure_pa[k], t = s.temp_k[c * nz + k], h = s.humidity[c * nz + k];
      if (!(p >= kHumidityTopPa) || !std::isfinite(h) || !(t >= kMinMedianTempK && t <= kMaxMedianTempK)) continue;
      if (!s.surface_pressure_pa.empty() && !(p <= s.surface_pressure_pa[c])) continue;  // below ground
      // Relative to saturation, linear in the value (so that a unit error shows as its factor):
      // RH itself, or q / q_s and r / r_s (saturation over water, Bolton 1980 eq. 10).
      const double rs = thermo::saturation_mixing_ratio(t, p);
      if (s.humidity_kind == HumidityKind::relative_humidity)
        rh.push_back(h);
      else if (s.humidity_kind == HumidityKind::specific_humidity)
        rh.push_back(h / (rs / (1.0 + rs)));
      else
        rh.push_back(h / rs);
    }
  if (rh.size() < kMinSamples) return;
  const double m = median(rh);
  if (m >= kMinMedianRh && m <= kMaxMedianRh) return;
  std::string text = std::string(humidity_words(s.humidity_kind)) + " in " + quoted_units(origin);
  if (s.humidity_kind == HumidityKind::relative_humidity)
    text += " has a median of " + num(in_units(origin, median(s.humidity))) + " (" + num(100 * m) +
            " % below 500 hPa)";
  else
    text += " is a median " + num(100 * m) + " % of saturation below 500 hPa";
  std::string hint = factor_hint(m / 0.5);  // 50 %: a typical median relative humidity (common practice)
  if (s.humidity_kind == HumidityKind::relative_humidity && m > 0.5 * 25 && m < 0.5 * 400)
    hint = ": the values look like percent";
  else if (s.humidity_kind == HumidityKind::relative_humidity && m < 0.5 / 25 && m > 0.5 / 400)
    hint = ": the values look like a fraction (0 to 1)";
  else if (s.humidity_kind != HumidityKind::relative_humidity && m > 0.5 * 250 && m < 0.5 * 4000)
    hint = ": the values look like g/kg";
  fail(origin, text + (hint.empty() ? ": expected a median from 1 % to 300 %" : hint));
}

void check_heights(const ColumnSample& s) {
  const FieldOrigin& origin = s.height;
  const std::size_t nz = s.pressure_pa.size();
  std::vector<std::size_t> order(nz);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return s.pressure_pa[a] > s.pressure_pa[b]; });
  std::size_t judged = 0, rising = 0, falling = 0;
  std::vector<double> ratios;
  double example_p0 = kNaN, example_z0 = kNaN, example_p1 = kNaN, example_z1 = kNaN;
  for (std::size_t c = 0; c < s.n_columns; ++c) {
    std::vector<std::size_t> valid;
    for (std::size_t k : order)
      if (std::isfinite(s.height_m[c * nz + k])) valid.push_back(k);
    if (valid.size() < 3) continue;
    bool up = true, down = true, constant = true;
    for (std::size_t i = 1; i < valid.size(); ++i) {
      const double z0 = s.height_m[c * nz + valid[i - 1]], z1 = s.height_m[c * nz + valid[i]];
      if (!(z1 > z0)) up = false;
      if (!(z1 < z0)) down = false;
      if (z1 != z0) constant = false;
    }
    if (constant) continue;  // no order to judge (heights not given per level)
    ++judged;
    if (std::isnan(example_p0) && !up) {
      example_p0 = s.pressure_pa[valid.front()];
      example_z0 = s.height_m[c * nz + valid.front()];
      example_p1 = s.pressure_pa[valid.back()];
      example_z1 = s.height_m[c * nz + valid.back()];
    }
    rising += up;
    falling += down;
    if (!up) continue;
    // Hypsometric thickness over the levels with temperature (trapezoid in ln p).
    double thickness = 0.0, measured = 0.0;
    std::size_t prev = nz;
    for (std::size_t k : valid) {
      const double t = s.temp_k[c * nz + k];
      if (!(t >= kMinMedianTempK && t <= kMaxMedianTempK)) continue;
      if (prev < nz) {
        const double t0 = s.temp_k[c * nz + prev];
        thickness += thermo::kRd / thermo::kGravity * 0.5 * (t0 + t) * std::log(s.pressure_pa[prev] / s.pressure_pa[k]);
        measured += s.height_m[c * nz + k] - s.height_m[c * nz + prev];
      }
      prev = k;
    }
    if (thickness > 0.0) ratios.push_back(measured / thickness);
  }
  if (judged == 0) return;
  const std::string what = origin.quantity == "geopotential" ? "geopotential" : "geopotential height";
  const std::string name = what + " in " + quoted_units(origin);
  if (2 * rising < judged) {
    const std::string example = " (" + num(example_z0) + " m at " + num(example_p0 / 100) + " hPa, " + num(example_z1) +
                                " m at " + num(example_p1 / 100) + " hPa)";
    if (2 * falling >= judged)
      fail(origin, name + " decreases upward in " + std::to_string(falling) + " of " + std::to_string(judged) +
                       " sampled columns" + example + ": negated values, or pressure levels in the reverse order of the data");
    fail(origin, name + " is not monotonic in pressure in " + std::to_string(judged - rising) + " of " +
                     std::to_string(judged) + " sampled columns" + example +
                     ": the pressure coordinate does not follow the order of the data");
  }
  if (ratios.size() < 3) return;
  const double m = median(ratios);
  if (m >= kMinThicknessRatio && m <= kMaxThicknessRatio) return;
  std::string text = name + ": the layer thicknesses are " + num(m) +
                     " times what the temperatures give by the hypsometric equation (median of sampled columns)";
  if (m > thermo::kGravity / 1.5 && m < thermo::kGravity * 1.5)
    text += ": the values look like geopotential (m2 s-2), not geopotential height (m)";
  else if (m > 1 / (thermo::kGravity * 1.5) && m < 1.5 / thermo::kGravity)
    text += ": the values look like geopotential height (m), not geopotential (m2 s-2)";
  else
    text += factor_hint(m);
  fail(origin, text);
}

void check_surface_pressure(const ColumnSample& s) {
  std::vector<double> valid;
  for (double v : s.surface_pressure_pa)
    if (!std::isnan(v)) valid.push_back(v);
  if (valid.size() < kMinSamples) return;
  const double m = median(valid);
  if (m >= kMinSurfacePressurePa && m <= kMaxPressurePa) return;
  const FieldOrigin& origin = s.surface_pressure;
  std::string text = "surface air pressure in " + quoted_units(origin) + " has a median of " + num(in_units(origin, m)) +
                     " (" + num(m / 100) + " hPa)";
  std::string hint = factor_hint(m / 90000.0);  // a typical surface pressure, 900 hPa (common practice)
  fail(origin, text + (hint.empty() ? ": expected a median from 300 to 1100 hPa" : hint));
}

std::string range_text(const std::vector<double>& values) {
  double lo = HUGE_VAL, hi = -HUGE_VAL;
  for (double v : values)
    if (std::isfinite(v)) {
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
  return num(lo) + " to " + num(hi);
}

void check_degrees(const std::string& file, const std::string& variable, const std::string& units,
                   const std::vector<double>& degrees, bool allow_missing, const char* quantity, double lo, double hi) {
  for (double v : degrees) {
    if (std::isnan(v) && allow_missing) continue;
    if (!std::isfinite(v))
      throw InputError(file, variable, std::string(quantity) + " in '" + shorten(units) + "' has a value " + num(v) +
                                           ": expected finite coordinates");
    if (v < lo || v > hi)
      throw InputError(file, variable, std::string(quantity) + " in '" + shorten(units) + "' ranges from " +
                                           range_text(degrees) + ": expected " + num(lo) + " to " + num(hi) + " degrees");
  }
}

}  // namespace

std::string shorten(const std::string& text, std::size_t max_chars) {
  std::string out;
  for (char ch : text) out += (ch == '\n' || ch == '\r' || ch == '\t') ? ' ' : ch;  // one line
  if (out.size() <= max_chars) return out;
  return out.substr(0, max_chars) + "... (" + std::to_string(text.size()) + " characters)";
}

std::string format_bytes(double bytes) {
  const char* units[] = {"bytes", "KiB", "MiB", "GiB", "TiB", "PiB", "EiB"};
  int u = 0;
  while (bytes >= 1024.0 && u < 6) {
    bytes /= 1024.0;
    ++u;
  }
  char text[48];
  std::snprintf(text, sizeof text, u == 0 ? "%.0f %s" : "%.1f %s", bytes, units[u]);
  return text;
}

void check_memory(const std::string& file, const std::string& variable, const std::string& what, double bytes) {
  const long pages = sysconf(_SC_PHYS_PAGES), page_size = sysconf(_SC_PAGE_SIZE);
  const double physical = pages > 0 && page_size > 0 ? static_cast<double>(pages) * static_cast<double>(page_size) : HUGE_VAL;
  if (bytes <= physical) return;
  throw InputError(file, variable, what + " would need " + format_bytes(bytes) + " of memory, more than this machine's " +
                                       format_bytes(physical) + " (a damaged or absurd dimension length?)");
}

void check_packing_attribute(const std::string& file, const std::string& variable, const std::string& name,
                             const AttributeValue& value) {
  if (!value.present) return;
  const bool packing = name == "scale_factor" || name == "add_offset";
  const bool scalar = packing || name == "_FillValue" || name == "valid_min" || name == "valid_max";
  std::string expected = packing ? "one finite number" : scalar ? "one number" : name == "valid_range" ? "two numbers" : "numbers";
  if (name == "scale_factor") expected = "one finite, non-zero number";
  auto bad = [&](const std::string& found) {
    throw InputError(file, variable, "attribute " + name + ": expected " + expected + ", found " + found);
  };
  if (value.is_text) bad("text '" + shorten(value.text) + "'");
  const std::size_t n = value.numbers.size();
  if (n == 0) bad("no value");
  if (scalar && n != 1) bad(std::to_string(n) + " values");
  if (name == "valid_range" && n != 2) bad(std::to_string(n) + " values");
  if (packing && !std::isfinite(value.numbers[0])) bad(num(value.numbers[0]));
  if (name == "scale_factor" && value.numbers[0] == 0.0) bad("0");
  if (name == "valid_range" && !(value.numbers[0] <= value.numbers[1]))
    bad(num(value.numbers[0]) + ", " + num(value.numbers[1]) + " (minimum above maximum)");
}

void check_pressure_levels(const std::string& file, const std::string& variable, const std::string& units,
                           const std::vector<double>& pressure_pa) {
  const std::string name = "pressure levels in '" + shorten(units) + "'";
  const std::size_t n = pressure_pa.size();
  if (n < 3)
    throw InputError(file, variable, "at least 3 pressure levels (the analysis needs 3 usable levels), found " + std::to_string(n));
  for (std::size_t k = 0; k < n; ++k)
    if (!std::isfinite(pressure_pa[k]))
      throw InputError(file, variable, name + ": level " + std::to_string(k) + " is " + num(pressure_pa[k]) + ": expected finite values");
  double lo = *std::min_element(pressure_pa.begin(), pressure_pa.end());
  double hi = *std::max_element(pressure_pa.begin(), pressure_pa.end());
  if (lo < kMinPressurePa || hi > kMaxPressurePa) {
    std::string text = name + " range from " + num(lo / 100) + " to " + num(hi / 100) + " hPa: expected 1 to 1100 hPa";
    const double ratio = std::sqrt(lo * hi) / 30000.0;  // geometric middle of 1000-10 hPa (common practice)
    text += factor_hint(ratio);
    throw InputError(file, variable, text);
  }
  const bool descending = pressure_pa[1] < pressure_pa[0];
  for (std::size_t k = 1; k < n; ++k) {
    const double a = pressure_pa[k - 1], b = pressure_pa[k];
    if (a == b)
      throw InputError(file, variable, name + ": " + num(b / 100) + " hPa appears twice (levels " + std::to_string(k - 1) +
                                           " and " + std::to_string(k) + "): expected strictly monotonic levels");
    if ((b < a) != descending)
      throw InputError(file, variable, name + ": level " + std::to_string(k) + " (" + num(b / 100) + " hPa) after " +
                                           num(a / 100) + " hPa breaks the " + (descending ? "descending" : "ascending") +
                                           " order: expected strictly monotonic levels");
  }
}

void check_latitudes(const std::string& file, const std::string& variable, const std::string& units,
                     const std::vector<double>& degrees, bool allow_missing) {
  check_degrees(file, variable, units, degrees, allow_missing, "latitude", -90.0, 90.0);
}

void check_longitudes(const std::string& file, const std::string& variable, const std::string& units,
                      const std::vector<double>& degrees, bool allow_missing) {
  check_degrees(file, variable, units, degrees, allow_missing, "longitude", -360.0, 720.0);
}

bool plausible_surface_pressure(double pressure_pa) {
  return pressure_pa >= kMinSurfacePressurePa && pressure_pa <= kMaxPressurePa;
}

/// Infinite values are never data: a quantity mostly infinite is refused (single ones are missing).
void check_infinite(const FieldOrigin& origin, const std::vector<double>& values, const char* quantity) {
  std::size_t given = 0, infinite = 0;
  for (double v : values) {
    given += !std::isnan(v);
    infinite += std::isinf(v);
  }
  if (infinite > 0 && 2 * infinite >= given)
    fail(origin, std::string(quantity) + " in " + quoted_units(origin) + " has " + std::to_string(infinite) + " infinite values among " +
                     std::to_string(given) + " sampled: expected finite data");
}

void check_sample(const ColumnSample& s) {
  if (s.temp.present()) check_infinite(s.temp, s.temp_k, "air temperature");
  if (s.humidity_origin.present()) check_infinite(s.humidity_origin, s.humidity, humidity_words(s.humidity_kind));
  if (s.height.present()) check_infinite(s.height, s.height_m, "geopotential height");
  if (s.surface_pressure.present()) check_infinite(s.surface_pressure, s.surface_pressure_pa, "surface air pressure");
  if (s.temp.present()) check_temperature(s.temp, s.temp_k, "air temperature");
  if (s.humidity_origin.present()) check_humidity(s);
  if (s.height.present()) check_heights(s);
  if (s.surface_pressure.present() && !s.surface_pressure_pa.empty()) check_surface_pressure(s);
}

}  // namespace latentlift::io::detail
