// The fast pseudo-adiabat tables against the reference integrator, over a dense sweep.
// Requirement (METHODS, "Pseudo-adiabats"): within 0.02 K of the reference from 1050 to
// 100 hPa for theta_w from -40 to +40 degC.
#include <gtest/gtest.h>

#include <cmath>

#include "latentlift/pseudoadiabat.hpp"
#include "latentlift/thermo.hpp"

namespace pa = latentlift::pseudoadiabat;
using latentlift::thermo::kZeroCelsiusK;

namespace {
constexpr double kToleranceK = 0.02;  // METHODS.md accuracy requirement of the fast path

// Dense sweep: theta_w every 0.37 K (off the table nodes) and pressure every 7.3 hPa.
template <typename F>
void sweep(F&& check) {
  for (double theta_c = -40.0; theta_c <= 40.0 + 1e-9; theta_c += 0.37) {
    for (double p_hpa = 1050.0; p_hpa >= 100.0 - 1e-9; p_hpa -= 7.3) check(theta_c + kZeroCelsiusK, p_hpa * 100.0);
  }
}
}  // namespace

TEST(PseudoadiabatTable, TemperatureMatchesReferenceIntegrationOverDenseSweep) {
  const auto& table = pa::Table::instance();
  double worst = 0.0;
  int points = 0;
  for (double theta_c = -40.0; theta_c <= 40.0 + 1e-9; theta_c += 0.37) {
    const double theta = theta_c + kZeroCelsiusK;
    // Follow the reference along the sweep pressures, one integration per curve.
    double t_ref = pa::reference_temperature_k(theta, 105000.0);
    double p_prev = 105000.0;
    for (double p_hpa = 1050.0; p_hpa >= 100.0 - 1e-9; p_hpa -= 7.3) {
      const double p = p_hpa * 100.0;
      t_ref = pa::reference_follow_k(t_ref, p_prev, p);
      p_prev = p;
      const double err = std::fabs(table.temperature_k(theta, std::log(p)) - t_ref);
      worst = std::max(worst, err);
      ++points;
      ASSERT_LT(err, kToleranceK) << "theta_w " << theta_c << " degC, p " << p_hpa << " hPa";
    }
  }
  EXPECT_GT(points, 25000);
  RecordProperty("worst_error_mK", static_cast<int>(std::lround(worst * 1000)));
}

TEST(PseudoadiabatTable, InverseRecoversThetaWOfTheReferenceCurve) {
  // theta_w_star of (T on the reference curve, p) must give back the curve's label.
  const auto& table = pa::Table::instance();
  double worst = 0.0;
  for (double theta_c = -40.0; theta_c <= 40.0 + 1e-9; theta_c += 1.37) {
    const double theta = theta_c + kZeroCelsiusK;
    double t_ref = pa::reference_temperature_k(theta, 105000.0);
    double p_prev = 105000.0;
    for (double p_hpa = 1050.0; p_hpa >= 100.0 - 1e-9; p_hpa -= 7.3) {
      const double p = p_hpa * 100.0;
      t_ref = pa::reference_follow_k(t_ref, p_prev, p);
      p_prev = p;
      const double err = std::fabs(table.theta_w_k(t_ref, std::log(p)) - theta);
      worst = std::max(worst, err);
      ASSERT_LT(err, kToleranceK) << "theta_w " << theta_c << " degC, p " << p_hpa << " hPa";
    }
  }
}

TEST(PseudoadiabatTable, VirtualTemperatureIsThatOfSaturatedAirOnTheCurve) {
  // Tv = T (1 + rs/eps) / (1 + rs), rs = rs(T, p) (AMS Glossary, virtual temperature).
  const auto& table = pa::Table::instance();
  sweep([&](double theta, double p) {
    const double t = table.temperature_k(theta, std::log(p));
    const double rs = latentlift::thermo::saturation_mixing_ratio(t, p);
    const double tv = latentlift::thermo::virtual_temperature_k(t, rs);
    ASSERT_NEAR(table.virtual_temperature_k(theta, std::log(p)), tv, 0.01);
  });
}

TEST(PseudoadiabatTable, VirtualInverseRoundTrips) {
  const auto& table = pa::Table::instance();
  sweep([&](double theta, double p) {
    const double tv = table.virtual_temperature_k(theta, std::log(p));
    ASSERT_NEAR(table.theta_w_from_virtual_k(tv, std::log(p)), theta, kToleranceK);
  });
}

TEST(PseudoadiabatTable, CurveLookupEqualsTableLookup) {
  const auto& table = pa::Table::instance();
  const auto curve = table.curve(295.3);
  for (double p_hpa = 1050.0; p_hpa >= 100.0; p_hpa -= 13.0) {
    const double x = std::log(p_hpa * 100.0);
    EXPECT_DOUBLE_EQ(curve.temperature_k(x), table.temperature_k(295.3, x));
    EXPECT_DOUBLE_EQ(curve.virtual_temperature_k(x), table.virtual_temperature_k(295.3, x));
  }
}

TEST(PseudoadiabatTable, InverseSlopeMatchesFiniteDifference) {
  const auto& table = pa::Table::instance();
  const double x = std::log(70000.0);
  double slope = 0.0;
  table.theta_w_k(275.0, x, &slope);
  const double fd = (table.theta_w_k(275.01, x) - table.theta_w_k(274.99, x)) / 0.02;
  EXPECT_NEAR(slope, fd, 1e-3);
}

TEST(PseudoadiabatReference, PassesThroughItsLabelAt1000hPa) {
  // By definition theta_w is the temperature of the pseudo-adiabat at 1000 hPa.
  EXPECT_NEAR(pa::reference_temperature_k(290.0, 100000.0), 290.0, 1e-12);
  EXPECT_NEAR(pa::reference_theta_w_k(pa::reference_temperature_k(290.0, 50000.0), 50000.0), 290.0, 1e-7);
}
