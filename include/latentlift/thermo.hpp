// Moist thermodynamics: constants and pure functions (no I/O, no state).
// SI units throughout: K, Pa, kg/kg, J/kg. Sources as in METHODS of the README.
// The one-line formulas used per level by the column kernel are defined inline here.
#pragma once

#include <cmath>

namespace latentlift::thermo {

constexpr double kRd = 287.04;           // J kg-1 K-1, dry air (Bolton 1980)
constexpr double kRv = 461.5;            // J kg-1 K-1, water vapour (Bolton 1980)
constexpr double kEps = kRd / kRv;       // ratio of gas constants
constexpr double kCpd = 1005.7;          // J kg-1 K-1, dry air at constant pressure (Bolton 1980)
constexpr double kCpv = 1875.0;          // J kg-1 K-1, water vapour at constant pressure
constexpr double kGravity = 9.80665;     // m s-2, standard gravity (CGPM 1901, SI)
constexpr double kKappaDry = kRd / kCpd; // Poisson exponent of dry air
constexpr double kZeroCelsiusK = 273.15; // K
constexpr double kReferencePressurePa = 100000.0;  // 1000 hPa, theta reference
// Bolton (1980) eq. 10: es = 6.112 hPa exp(17.67 t / (t + 243.5)), t in degC.
constexpr double kBoltonEs0Pa = 611.2;
constexpr double kBoltonEsA = 17.67;
constexpr double kBoltonEsB = 243.5;

/// Latent heat of vaporisation, J/kg, at temp_k (Bolton 1980, eq. 2).
double latent_heat_vaporisation(double temp_k);

/// Saturation vapour pressure over liquid water, Pa (Bolton 1980, eq. 10).
inline double saturation_vapour_pressure_pa(double temp_k) {
  const double t = temp_k - kZeroCelsiusK;
  return kBoltonEs0Pa * std::exp(kBoltonEsA * t / (t + kBoltonEsB));
}

/// Saturation vapour pressure over ice, Pa, for temp_k > 110 K (Murphy and Koop 2005, eq. 7).
double saturation_vapour_pressure_ice_pa(double temp_k);

/// What a relative humidity is relative to: liquid water (WMO definition), ice below 0 degC,
/// or a blend between cold_k (ice) and warm_k (water) as a producing centre defines it.
enum class SaturationReference { water, ice_below_freezing, mixed };
/// The blend of `mixed`: weight of water w = ((T - cold_k) / (warm_k - cold_k))^exponent.
struct MixedPhase {
  double cold_k = 250.16;   // T_ice of ECMWF IFS Documentation Cy47r3, Part IV: Physical Processes, ch. 12
  double warm_k = 273.16;   // T_0, same source (alpha = ((T - T_ice) / (T_0 - T_ice))^2)
  double exponent = 2.0;    // 2: ECMWF IFS (quadratic); 1: NCEP GFS funcphys fpvsx (linear)
};

/// Saturation vapour pressure, Pa, that a relative humidity of `reference` refers to: Bolton eq. 10
/// over water, Murphy and Koop eq. 7 over ice, e = w e_water + (1 - w) e_ice in between for mixed.
double saturation_vapour_pressure_reference_pa(double temp_k, SaturationReference reference,
                                               const MixedPhase& mixed = {});

/// Relative humidity over liquid water (fraction) of relative humidity rh (fraction) given w.r.t. `reference`.
double relative_humidity_over_water(double rh, double temp_k, SaturationReference reference,
                                    const MixedPhase& mixed = {});

/// Surface pressure, Pa, at geopotential height surface_height_m from a column's levels (any order,
/// NaN skipped): linear in ln p between the levels around it; below the lowest level along the
/// ICAO standard-atmosphere lapse rate 6.5 K/km from that level's temperature (ISO 2533:1975,
/// p = p0 (T/T0)^(g0 / (R gamma))); NaN above the highest level or with fewer than one level.
double surface_pressure_from_height_pa(int n_levels, const double* pressure_pa, const double* height_m,
                                       const double* temp_k, double surface_height_m);

/// Dew point (K) of vapour pressure e_pa: exact inverse of Bolton eq. 10.
inline double dew_point_k(double vapour_pressure_pa) {
  const double l = std::log(vapour_pressure_pa / kBoltonEs0Pa);
  return kZeroCelsiusK + kBoltonEsB * l / (kBoltonEsA - l);
}

/// Mixing ratio, kg/kg, of vapour pressure e_pa in air at pressure_pa (common practice: r = eps e / (p - e)).
inline double mixing_ratio(double vapour_pressure_pa, double pressure_pa) {
  return kEps * vapour_pressure_pa / (pressure_pa - vapour_pressure_pa);
}

/// Vapour pressure, Pa, from mixing ratio r (kg/kg) at pressure_pa (inverse of mixing_ratio).
inline double vapour_pressure_from_mixing_ratio_pa(double mixing_ratio, double pressure_pa) {
  return mixing_ratio * pressure_pa / (kEps + mixing_ratio);
}

/// Vapour pressure, Pa, from specific humidity q (kg/kg): e = q p / (eps + (1 - eps) q).
inline double vapour_pressure_from_specific_humidity_pa(double specific_humidity, double pressure_pa) {
  return specific_humidity * pressure_pa / (kEps + (1.0 - kEps) * specific_humidity);
}

/// Saturation mixing ratio over liquid water, kg/kg, at (temp_k, pressure_pa) (Bolton eq. 10 + mixing_ratio).
double saturation_mixing_ratio(double temp_k, double pressure_pa);

/// Virtual temperature, K: Tv = T (1 + r/eps) / (1 + r) (AMS Glossary).
inline double virtual_temperature_k(double temp_k, double mixing_ratio) {
  return temp_k * (1.0 + mixing_ratio / kEps) / (1.0 + mixing_ratio);
}

/// Poisson exponent kappa = (Rd/cpd)(1 - 0.28 r), r in kg/kg (Bolton 1980, eq. 24 form).
inline double poisson_kappa(double mixing_ratio) { return kKappaDry * (1.0 - 0.28 * mixing_ratio); }

/// Temperature, K, after dry-adiabatic (Poisson) change from (temp_k, from_pa) to to_pa with exponent kappa.
double poisson_temperature_k(double temp_k, double from_pa, double to_pa, double kappa);

/// Potential temperature, K, referred to 1000 hPa, with kappa = poisson_kappa(r) (Bolton 1980, eq. 24 form).
double potential_temperature_k(double temp_k, double pressure_pa, double mixing_ratio);

/// Temperature at the lifting condensation level, K, from temp_k and dew_point_k (Bolton 1980, eq. 15).
inline double lcl_temperature_k(double temp_k, double dew_point_k) {
  return 1.0 / (1.0 / (dew_point_k - 56.0) + std::log(temp_k / dew_point_k) / 800.0) + 56.0;
}

/// Pressure of the LCL, Pa: p (T_L / T)^(1/kappa), kappa = poisson_kappa(r) (Bolton 1980).
double lcl_pressure_pa(double temp_k, double pressure_pa, double lcl_temp_k, double mixing_ratio);

/// Equivalent potential temperature, K (Bolton 1980, eq. 39), from T, Td (K) and p (Pa).
double equivalent_potential_temperature_k(double temp_k, double dew_point_k, double pressure_pa);

/// Pseudo-adiabatic lapse rate dT/dp, K/Pa, liquid only (AMS Glossary, written in pressure, see METHODS).
double pseudoadiabatic_dtdp(double temp_k, double pressure_pa);

}  // namespace latentlift::thermo
