// Pseudo-adiabats (saturated adiabats, liquid only, condensate falls out).
// A pseudo-adiabat is labelled by its wet-bulb potential temperature theta_w:
// the temperature (K) it has at 1000 hPa. SI units: K, Pa.
#pragma once

#include <vector>

namespace latentlift::pseudoadiabat {

/// Reference: temperature (K) at pressure_pa on the pseudo-adiabat theta_w_k, by
/// adaptive Runge-Kutta (Dormand-Prince 5(4)) integration of thermo::pseudoadiabatic_dtdp.
double reference_temperature_k(double theta_w_k, double pressure_pa);

/// Reference: temperature (K) at to_pa of the pseudo-adiabat through (temp_k, from_pa) (same integrator).
double reference_follow_k(double temp_k, double from_pa, double to_pa);

/// Reference: theta_w (K) of the pseudo-adiabat through (temp_k, pressure_pa) (same integrator).
double reference_theta_w_k(double temp_k, double pressure_pa);

/// Fast path: tables of the reference pseudo-adiabats in (theta_w, ln p), built once,
/// with cubic (4x4 Lagrange) interpolation, and their inverses. Valid from 1150 to 10 hPa
/// and theta_w from -100 to +70 degC; within 0.02 K of the reference for theta_w from
/// -40 to +40 degC and 1050 to 100 hPa (tests/thermo sweep). Immutable and thread-safe.
class Table {
 public:
  /// The process-wide table (built on first use, about 0.2 s).
  static const Table& instance();

  /// Temperature (K) of pseudo-adiabat theta_w_k at ln(pressure in Pa).
  double temperature_k(double theta_w_k, double ln_pressure_pa) const;
  /// Virtual temperature (K) of saturated air (r = rs, no condensate) on pseudo-adiabat theta_w_k at ln p.
  double virtual_temperature_k(double theta_w_k, double ln_pressure_pa) const;
  /// theta_w (K) of the pseudo-adiabat through temperature temp_k at ln p; *dtheta_dt gets d(theta_w)/dT if given.
  double theta_w_k(double temp_k, double ln_pressure_pa, double* dtheta_dt = nullptr) const;
  /// theta_w (K) of the pseudo-adiabat whose saturated virtual temperature at ln p equals tv_k.
  double theta_w_from_virtual_k(double tv_k, double ln_pressure_pa, double* dtheta_dtv = nullptr) const;

  /// The tables cut at one pressure (interpolated in ln p once): the same values as the
  /// 2-D look-ups at that pressure, for the many look-ups of a grid's fixed levels.
  struct Row {
    std::vector<double> theta_of_t, theta_of_tv;  // 4 cubic coefficients per stencil start
    std::vector<double> t_of_theta, tv_of_theta;  // cut values per theta_w node
  };
  void cut(double ln_pressure_pa, Row& row) const;
  /// theta_w (K) through temp_k at the row's pressure; *dtheta_dt gets the slope if given.
  double theta_w_k(const Row& row, double temp_k, double* dtheta_dt = nullptr) const;
  /// theta_w (K) through saturated virtual temperature tv_k at the row's pressure.
  double theta_w_from_virtual_k(const Row& row, double tv_k, double* dtheta_dtv = nullptr) const;

  /// A pseudo-adiabat fixed once, for a run of look-ups along one parcel ascent.
  class Curve {
   public:
    double temperature_k(double ln_pressure_pa) const;
    double virtual_temperature_k(double ln_pressure_pa) const;
    double temperature_k(const Row& at) const;          // at a cut pressure
    double virtual_temperature_k(const Row& at) const;
   private:
    friend class Table;
    const Table* table_ = nullptr;
    int i0_ = 0;
    double w_[4] = {0, 0, 0, 0};
  };
  Curve curve(double theta_w_k) const;

  static constexpr double kThetaMinK = 173.15;   // -100 degC
  static constexpr double kThetaMaxK = 343.15;   // +70 degC
  static constexpr double kPressureMaxPa = 115000.0;
  static constexpr double kPressureMinPa = 1000.0;

  Table();  // builds from the reference integrator; use instance()

 private:
  struct Grid {
    double x0, dx;
    int nx;
  };
  double interp(const std::vector<double>& values, const Grid& gx, double x, double y,
                double* dvdx) const;
  Grid theta_, lnp_, temp_, tv_;
  std::vector<double> t_of_theta_;    // [lnp][theta]
  std::vector<double> tv_of_theta_;   // [lnp][theta]
  std::vector<double> theta_of_t_;    // [lnp][temp]
  std::vector<double> theta_of_tv_;   // [lnp][tv]
};

}  // namespace latentlift::pseudoadiabat
