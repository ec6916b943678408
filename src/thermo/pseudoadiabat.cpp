// Pseudo-adiabats: the reference integrator and the fast tables built from it.
#include "latentlift/pseudoadiabat.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include "latentlift/thermo.hpp"

namespace latentlift::pseudoadiabat {

namespace {

// dT/d(ln p) along the pseudo-adiabat (METHODS: AMS Glossary form, multiplied by p).
inline double slope(double temp_k, double ln_p) {
  const double p = std::exp(ln_p);
  return p * thermo::pseudoadiabatic_dtdp(temp_k, p);
}

// Dormand-Prince 5(4) with step-size control (Dormand and Prince 1980, J. Comput.
// Appl. Math. 6), integrating T from x0 to x1 in x = ln p. Absolute tolerance in K.
double integrate(double temp_k, double x0, double x1, double tolerance_k = 1e-10) {
  if (x0 == x1) return temp_k;
  const double direction = x1 > x0 ? 1.0 : -1.0;
  double h = direction * 0.02;
  double x = x0, t = temp_k;
  int guard = 0;
  while ((x1 - x) * direction > 1e-15) {
    if (++guard > 100000) throw std::runtime_error("pseudo-adiabat integration did not converge");
    if ((x + h - x1) * direction > 0) h = x1 - x;
    const double k1 = slope(t, x);
    const double k2 = slope(t + h * (k1 / 5), x + h / 5);
    const double k3 = slope(t + h * (3 * k1 / 40 + 9 * k2 / 40), x + 3 * h / 10);
    const double k4 = slope(t + h * (44 * k1 / 45 - 56 * k2 / 15 + 32 * k3 / 9), x + 4 * h / 5);
    const double k5 = slope(t + h * (19372 * k1 / 6561 - 25360 * k2 / 2187 + 64448 * k3 / 6561 -
                                     212 * k4 / 729),
                            x + 8 * h / 9);
    const double k6 = slope(t + h * (9017 * k1 / 3168 - 355 * k2 / 33 + 46732 * k3 / 5247 +
                                     49 * k4 / 176 - 5103 * k5 / 18656),
                            x + h);
    const double t5 = t + h * (35 * k1 / 384 + 500 * k3 / 1113 + 125 * k4 / 192 -
                               2187 * k5 / 6784 + 11 * k6 / 84);
    const double k7 = slope(t5, x + h);
    const double error =
        std::fabs(h * ((35.0 / 384 - 5179.0 / 57600) * k1 + (500.0 / 1113 - 7571.0 / 16695) * k3 +
                       (125.0 / 192 - 393.0 / 640) * k4 + (-2187.0 / 6784 + 92097.0 / 339200) * k5 +
                       (11.0 / 84 - 187.0 / 2100) * k6 - k7 / 40));
    if (error <= tolerance_k || std::fabs(h) < 1e-9) {
      x += h;
      t = t5;
    }
    const double factor = error > 0 ? 0.9 * std::pow(tolerance_k / error, 0.2) : 5.0;
    h *= std::clamp(factor, 0.2, 5.0);
  }
  return t;
}

const double kLnReference = std::log(thermo::kReferencePressurePa);

// Cubic Lagrange weights for nodes -1, 0, 1, 2 at fraction t in [0, 1], and their derivatives.
inline void cubic_weights(double t, double w[4]) {
  const double tm1 = t - 1.0, tm2 = t - 2.0, tp1 = t + 1.0;
  constexpr double kSixth = 1.0 / 6.0;
  w[0] = -t * tm1 * tm2 * kSixth;
  w[1] = tp1 * tm1 * tm2 * 0.5;
  w[2] = -tp1 * t * tm2 * 0.5;
  w[3] = tp1 * t * tm1 * kSixth;
}
inline void cubic_derivative_weights(double t, double d[4]) {
  constexpr double kSixth = 1.0 / 6.0;
  const double t2 = 3 * t * t;
  d[0] = -(t2 - 6 * t + 2) * kSixth;
  d[1] = (t2 - 4 * t - 1) * 0.5;
  d[2] = -(t2 - 2 * t - 2) * 0.5;
  d[3] = (t2 - 1) * kSixth;
}
// First stencil node and fraction for coordinate x on a grid of n nodes.
inline int stencil(double x, double x0, double dx, int n, double& t) {
  const double u = (x - x0) / dx;
  // Floor without a library call; NaN and far-off coordinates are kept in range for the
  // cast (the fraction t stays NaN, so a NaN input gives a NaN result).
  const double uc = u >= 0.0 ? std::min(u, static_cast<double>(n)) : (u < 0.0 ? -1.0 : 0.0);
  int i = static_cast<int>(uc);
  if (uc < i) --i;
  i = std::clamp(i - 1, 0, n - 4);
  t = u - (i + 1);
  return i;
}

// The ln p interpolation of a table cut: weights wy over four rows `stride` apart.
inline double cut_value(const double wy[4], const double* r0, std::size_t stride) {
  return wy[0] * r0[0] + wy[1] * r0[stride] + wy[2] * r0[2 * stride] + wy[3] * r0[3 * stride];
}
// The cubic through f(-1), f(0), f(1), f(2) (the stencil of cubic_weights) as
// c0 + c1 t + c2 t^2 + c3 t^3: the same polynomial, evaluated by Horner's rule.
inline void cubic_coefficients(const double f[4], double c[4]) {
  constexpr double kSixth = 1.0 / 6.0;
  c[0] = f[1];
  c[1] = f[2] - f[0] * (1.0 / 3.0) - f[1] * 0.5 - f[3] * kSixth;
  c[2] = (f[0] + f[2]) * 0.5 - f[1];
  c[3] = (f[3] - f[0]) * kSixth + (f[1] - f[2]) * 0.5;
}
// Value at t of the cubic c; *slope (if given) gets its derivative divided by the node spacing dx.
inline double eval_cubic(const double c[4], double t, double dx, double* slope) {
  if (slope) *slope = (c[1] + t * (2.0 * c[2] + 3.0 * c[3] * t)) / dx;
  return c[0] + t * (c[1] + t * (c[2] + t * c[3]));
}

}  // namespace

double reference_follow_k(double temp_k, double from_pa, double to_pa) {
  return integrate(temp_k, std::log(from_pa), std::log(to_pa));
}

double reference_temperature_k(double theta_w_k, double pressure_pa) {
  return integrate(theta_w_k, kLnReference, std::log(pressure_pa));
}

double reference_theta_w_k(double temp_k, double pressure_pa) {
  return integrate(temp_k, std::log(pressure_pa), kLnReference);
}

// ---------------------------------------------------------------- the tables

namespace {
constexpr double kThetaStepK = 1.0;
constexpr double kLnpStep = 0.02;
constexpr double kTempMinK = 100.0;
constexpr double kTempMaxK = 360.0;
constexpr double kTempStepK = 1.0;

// Invert one row: values f over a grid g (monotonic increasing) at target y; cubic in g.
double invert_row(const double* f, int n, double g0, double dg, double y) {
  if (y <= f[0]) return g0 + (y - f[0]) / (f[1] - f[0]) * dg;
  if (y >= f[n - 1]) return g0 + (n - 1) * dg + (y - f[n - 1]) / (f[n - 1] - f[n - 2]) * dg;
  int lo = 0, hi = n - 1;
  while (hi - lo > 1) {
    const int mid = (lo + hi) / 2;
    (f[mid] <= y ? lo : hi) = mid;
  }
  // Newton on the cubic through the stencil around [lo, lo+1], kept inside the cell.
  const int i = std::clamp(lo - 1, 0, n - 4);
  double t = (lo - (i + 1)) + (y - f[lo]) / (f[lo + 1] - f[lo]);
  const double t_lo = lo - (i + 1), t_hi = t_lo + 1.0;
  for (int iter = 0; iter < 30; ++iter) {
    double w[4], d[4];
    cubic_weights(t, w);
    cubic_derivative_weights(t, d);
    double v = 0, dv = 0;
    for (int k = 0; k < 4; ++k) {
      v += w[k] * f[i + k];
      dv += d[k] * f[i + k];
    }
    const double step = (v - y) / dv;
    t = std::clamp(t - step, t_lo, t_hi);
    if (std::fabs(step) < 1e-13) break;
  }
  return g0 + (i + 1 + t) * dg;
}
}  // namespace

Table::Table() {
  theta_ = {kThetaMinK, kThetaStepK, static_cast<int>(std::lround((kThetaMaxK - kThetaMinK) / kThetaStepK)) + 1};
  const double x0 = std::log(kPressureMinPa);
  lnp_ = {x0, kLnpStep, static_cast<int>(std::ceil((std::log(kPressureMaxPa) - x0) / kLnpStep)) + 1};
  temp_ = {kTempMinK, kTempStepK, static_cast<int>(std::lround((kTempMaxK - kTempMinK) / kTempStepK)) + 1};
  tv_ = temp_;

  const int nt = theta_.nx, np = lnp_.nx;
  t_of_theta_.assign(static_cast<size_t>(nt) * np, 0.0);
  tv_of_theta_.assign(static_cast<size_t>(nt) * np, 0.0);
  // Reference node nearest above 1000 hPa; integrate outwards from 1000 hPa in both directions.
  const int j_ref = static_cast<int>(std::floor((kLnReference - x0) / kLnpStep));
  // Every node is computed on its own, so the tables do not depend on the thread count.
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(dynamic, 8)
#endif
  for (int i = 0; i < nt; ++i) {
    const double theta = theta_.x0 + i * theta_.dx;
    double t = theta, x = kLnReference;
    for (int j = j_ref; j >= 0; --j) {
      const double xj = x0 + j * kLnpStep;
      t = integrate(t, x, xj);
      x = xj;
      t_of_theta_[static_cast<size_t>(j) * nt + i] = t;
    }
    t = theta;
    x = kLnReference;
    for (int j = j_ref + 1; j < np; ++j) {
      const double xj = x0 + j * kLnpStep;
      t = integrate(t, x, xj);
      x = xj;
      t_of_theta_[static_cast<size_t>(j) * nt + i] = t;
    }
  }
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(static)
#endif
  for (int j = 0; j < np; ++j) {
    const double p = std::exp(x0 + j * kLnpStep);
    for (int i = 0; i < nt; ++i) {
      const size_t k = static_cast<size_t>(j) * nt + i;
      const double t = t_of_theta_[k];
      tv_of_theta_[k] = thermo::virtual_temperature_k(t, thermo::saturation_mixing_ratio(t, p));
    }
  }
  const int nT = temp_.nx;
  theta_of_t_.assign(static_cast<size_t>(nT) * np, 0.0);
  theta_of_tv_.assign(static_cast<size_t>(nT) * np, 0.0);
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(dynamic, 4)
#endif
  for (int j = 0; j < np; ++j) {
    const double* row_t = &t_of_theta_[static_cast<size_t>(j) * nt];
    const double* row_tv = &tv_of_theta_[static_cast<size_t>(j) * nt];
    for (int i = 0; i < nT; ++i) {
      const double y = temp_.x0 + i * temp_.dx;
      theta_of_t_[static_cast<size_t>(j) * nT + i] = invert_row(row_t, nt, theta_.x0, theta_.dx, y);
      theta_of_tv_[static_cast<size_t>(j) * nT + i] = invert_row(row_tv, nt, theta_.x0, theta_.dx, y);
    }
  }
}

const Table& Table::instance() {
  static const Table table;
  return table;
}

double Table::interp(const std::vector<double>& values, const Grid& gx, double x, double y,
                     double* dvdx) const {
  double tx, ty;
  const int ix = stencil(x, gx.x0, gx.dx, gx.nx, tx);
  const int iy = stencil(y, lnp_.x0, lnp_.dx, lnp_.nx, ty);
  double wy[4];
  cubic_weights(ty, wy);
  const size_t stride = static_cast<size_t>(gx.nx);
  const double* r0 = values.data() + static_cast<size_t>(iy) * stride + ix;
  // Interpolate in ln p first (four columns), then along the other coordinate with the
  // same cubic as a cut row (Table::cut), so that both paths give the same bits.
  double col[4];
  for (int k = 0; k < 4; ++k) col[k] = cut_value(wy, r0 + k, stride);
  double c[4];
  cubic_coefficients(col, c);
  return eval_cubic(c, tx, gx.dx, dvdx);
}

double Table::temperature_k(double theta_w_k, double ln_pressure_pa) const {
  return interp(t_of_theta_, theta_, theta_w_k, ln_pressure_pa, nullptr);
}

double Table::virtual_temperature_k(double theta_w_k, double ln_pressure_pa) const {
  return interp(tv_of_theta_, theta_, theta_w_k, ln_pressure_pa, nullptr);
}

double Table::theta_w_k(double temp_k, double ln_pressure_pa, double* dtheta_dt) const {
  return interp(theta_of_t_, temp_, temp_k, ln_pressure_pa, dtheta_dt);
}

double Table::theta_w_from_virtual_k(double tv_k, double ln_pressure_pa, double* dtheta_dtv) const {
  return interp(theta_of_tv_, tv_, tv_k, ln_pressure_pa, dtheta_dtv);
}

Table::Curve Table::curve(double theta_w_k) const {
  Curve c;
  c.table_ = this;
  double t;
  c.i0_ = stencil(theta_w_k, theta_.x0, theta_.dx, theta_.nx, t);
  cubic_weights(t, c.w_);
  return c;
}

void Table::cut(double ln_pressure_pa, Row& row) const {
  double ty;
  const int iy = stencil(ln_pressure_pa, lnp_.x0, lnp_.dx, lnp_.nx, ty);
  double wy[4];
  cubic_weights(ty, wy);
  auto cut_one = [&](const std::vector<double>& values, int nx, std::vector<double>& out) {
    out.resize(static_cast<size_t>(nx));
    const double* r0 = values.data() + static_cast<size_t>(iy) * nx;
    for (int k = 0; k < nx; ++k) out[k] = cut_value(wy, r0 + k, static_cast<std::size_t>(nx));
  };
  // The inverse tables are looked up along the cut as cubics per stencil start (coefficients
  // from the cut values exactly as interp() forms them: the same bits as a 2-D look-up).
  auto cubics = [](const std::vector<double>& cut_values, std::vector<double>& out) {
    const std::size_t n = cut_values.size();
    out.assign(4 * (n - 3), 0.0);
    for (std::size_t i = 0; i + 3 < n; ++i) cubic_coefficients(&cut_values[i], &out[4 * i]);
  };
  std::vector<double> values;
  cut_one(theta_of_t_, temp_.nx, values);
  cubics(values, row.theta_of_t);
  cut_one(theta_of_tv_, tv_.nx, values);
  cubics(values, row.theta_of_tv);
  cut_one(t_of_theta_, theta_.nx, row.t_of_theta);
  cut_one(tv_of_theta_, theta_.nx, row.tv_of_theta);
}

namespace {
// Cubic interpolation along one cut row (the second half of the 2-D look-up).
inline double along_row(const std::vector<double>& cubics, double x0, double dx, int nx, double x, double* slope) {
  double t;
  const int i = stencil(x, x0, dx, nx, t);
  return eval_cubic(&cubics[4 * static_cast<std::size_t>(i)], t, dx, slope);
}
}  // namespace

double Table::theta_w_k(const Row& row, double temp_k, double* dtheta_dt) const {
  return along_row(row.theta_of_t, temp_.x0, temp_.dx, temp_.nx, temp_k, dtheta_dt);
}

double Table::theta_w_from_virtual_k(const Row& row, double tv_k, double* dtheta_dtv) const {
  return along_row(row.theta_of_tv, tv_.x0, tv_.dx, tv_.nx, tv_k, dtheta_dtv);
}

double Table::Curve::temperature_k(const Row& at) const {
  const double* c = at.t_of_theta.data() + i0_;
  return w_[0] * c[0] + w_[1] * c[1] + w_[2] * c[2] + w_[3] * c[3];
}

double Table::Curve::virtual_temperature_k(const Row& at) const {
  const double* c = at.tv_of_theta.data() + i0_;
  return w_[0] * c[0] + w_[1] * c[1] + w_[2] * c[2] + w_[3] * c[3];
}

namespace {
inline double curve_lookup(const std::vector<double>& values, int nx, int i0, const double w[4],
                           double y, double y0, double dy, int ny) {
  double ty;
  const int iy = stencil(y, y0, dy, ny, ty);
  double wy[4];
  cubic_weights(ty, wy);
  double v = 0.0;
  for (int r = 0; r < 4; ++r) {
    const double* row = values.data() + static_cast<size_t>(iy + r) * nx + i0;
    v += wy[r] * (w[0] * row[0] + w[1] * row[1] + w[2] * row[2] + w[3] * row[3]);
  }
  return v;
}
}  // namespace

double Table::Curve::temperature_k(double ln_pressure_pa) const {
  const Table& t = *table_;
  return curve_lookup(t.t_of_theta_, t.theta_.nx, i0_, w_, ln_pressure_pa, t.lnp_.x0, t.lnp_.dx, t.lnp_.nx);
}

double Table::Curve::virtual_temperature_k(double ln_pressure_pa) const {
  const Table& t = *table_;
  return curve_lookup(t.tv_of_theta_, t.theta_.nx, i0_, w_, ln_pressure_pa, t.lnp_.x0, t.lnp_.dx, t.lnp_.nx);
}

}  // namespace latentlift::pseudoadiabat
