// Moist thermodynamics (see include/latentlift/thermo.hpp for units and sources).
#include "latentlift/thermo.hpp"

#include <cmath>

namespace latentlift::thermo {


double latent_heat_vaporisation(double temp_k) {
  return (2.501 - 0.00237 * (temp_k - kZeroCelsiusK)) * 1.0e6;  // Bolton (1980) eq. 2
}

double saturation_vapour_pressure_ice_pa(double temp_k) {
  // Murphy and Koop (2005), Q. J. R. Meteorol. Soc. 131, 1539-1565, eq. 7 (Pa, K; valid above 110 K).
  return std::exp(9.550426 - 5723.265 / temp_k + 3.53068 * std::log(temp_k) - 0.00728332 * temp_k);
}

double saturation_vapour_pressure_reference_pa(double temp_k, SaturationReference reference, const MixedPhase& mixed) {
  switch (reference) {
    case SaturationReference::water:
      break;
    case SaturationReference::ice_below_freezing:
      if (temp_k < kZeroCelsiusK) return saturation_vapour_pressure_ice_pa(temp_k);
      break;
    case SaturationReference::mixed:
      if (temp_k <= mixed.cold_k) return saturation_vapour_pressure_ice_pa(temp_k);
      if (temp_k < mixed.warm_k) {
        const double w = std::pow((temp_k - mixed.cold_k) / (mixed.warm_k - mixed.cold_k), mixed.exponent);
        return w * saturation_vapour_pressure_pa(temp_k) + (1.0 - w) * saturation_vapour_pressure_ice_pa(temp_k);
      }
      break;
  }
  return saturation_vapour_pressure_pa(temp_k);
}

double relative_humidity_over_water(double rh, double temp_k, SaturationReference reference, const MixedPhase& mixed) {
  if (reference == SaturationReference::water) return rh;
  return rh * saturation_vapour_pressure_reference_pa(temp_k, reference, mixed) / saturation_vapour_pressure_pa(temp_k);
}

double surface_pressure_from_height_pa(int n_levels, const double* p, const double* z, const double* t,
                                       double zs) {
  // ICAO standard atmosphere (ISO 2533:1975): lapse rate 6.5 K/km, R = 287.05287 J kg-1 K-1, g0.
  constexpr double kLapseRate = 0.0065;  // K/m
  constexpr double kRIcao = 287.05287;   // J kg-1 K-1
  if (!std::isfinite(zs)) return std::nan("");
  int lowest = -1;  // level of highest pressure with a height
  for (int i = 0; i < n_levels; ++i)
    if (p[i] > 0 && std::isfinite(z[i]) && (lowest < 0 || p[i] > p[lowest])) lowest = i;
  if (lowest < 0) return std::nan("");
  if (zs <= z[lowest]) {
    const double t0 = t && std::isfinite(t[lowest]) ? t[lowest] : 288.15;  // ISO 2533 sea-level value if missing
    const double ts = t0 + kLapseRate * (z[lowest] - zs);
    return p[lowest] * std::pow(ts / t0, kGravity / (kRIcao * kLapseRate));
  }
  // Walk up from the lowest level: the first pair of levels (adjacent in pressure) around zs.
  int below = lowest;
  for (;;) {
    int next = -1;  // the level next above `below`
    for (int i = 0; i < n_levels; ++i)
      if (p[i] > 0 && p[i] < p[below] && std::isfinite(z[i]) && (next < 0 || p[i] > p[next])) next = i;
    if (next < 0) return std::nan("");  // surface above the highest level
    if (z[next] >= zs) {
      if (z[next] == z[below]) return p[below];
      const double f = (zs - z[below]) / (z[next] - z[below]);
      return std::exp(std::log(p[below]) + f * (std::log(p[next]) - std::log(p[below])));
    }
    below = next;
  }
}

double saturation_mixing_ratio(double temp_k, double pressure_pa) {
  return mixing_ratio(saturation_vapour_pressure_pa(temp_k), pressure_pa);
}

double poisson_temperature_k(double temp_k, double from_pa, double to_pa, double kappa) {
  return temp_k * std::pow(to_pa / from_pa, kappa);
}

double potential_temperature_k(double temp_k, double pressure_pa, double r) {
  return poisson_temperature_k(temp_k, pressure_pa, kReferencePressurePa, poisson_kappa(r));
}

double lcl_pressure_pa(double temp_k, double pressure_pa, double lcl_temp_k, double r) {
  return pressure_pa * std::pow(lcl_temp_k / temp_k, 1.0 / poisson_kappa(r));
}

double equivalent_potential_temperature_k(double temp_k, double dew_point_k, double pressure_pa) {
  // Bolton (1980) eq. 39 (r in g/kg inside the formula).
  const double e = saturation_vapour_pressure_pa(dew_point_k);
  const double r_gkg = 1000.0 * mixing_ratio(e, pressure_pa);
  const double t_l = lcl_temperature_k(temp_k, dew_point_k);
  const double theta = temp_k * std::pow(kReferencePressurePa / pressure_pa, 0.2854 * (1.0 - 0.28e-3 * r_gkg));
  return theta * std::exp((3.376 / t_l - 0.00254) * r_gkg * (1.0 + 0.81e-3 * r_gkg));
}

double pseudoadiabatic_dtdp(double temp_k, double pressure_pa) {
  const double rs = saturation_mixing_ratio(temp_k, pressure_pa);
  const double lv = latent_heat_vaporisation(temp_k);
  const double numerator = (1.0 + rs / kEps) * (kRd * temp_k + lv * rs);
  const double denominator =
      pressure_pa * (kCpd + rs * kCpv + lv * lv * rs * (kEps + rs) / (kRd * temp_k * temp_k));
  return numerator / denominator;
}

}  // namespace latentlift::thermo
