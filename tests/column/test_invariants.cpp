// Invariants of the column analysis over thousands of random plausible columns
// (tests/column/random_columns.hpp; seeded, so every run sees the same columns).
// Each check is a statement of METHODS.md that must hold for ANY column, so no
// check value here comes from the kernel itself.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "column/random_columns.hpp"
#include "latentlift/column.hpp"
#include "latentlift/settings.hpp"

namespace latentlift {
namespace {

using test::OwnedColumn;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Tolerance of the orderings Td <= Tw <= T and theta_w <= theta_w_star. The fast
// pseudo-adiabat table is within 0.02 K of the reference (METHODS); an equality
// that holds exactly on paper (saturated level: Td = Tw = T) may come out of a
// table round trip off by rounding only, far below that.
constexpr double kOrderTolK = 1e-3;
// Pressures compared after re-ordering the levels: the same arithmetic up to
// summation order.
constexpr double kSameRel = 1e-9;

/// The columns every test runs over: 37 ERA5 levels up to 1 hPa and 27 up to 100 hPa.
const std::vector<OwnedColumn>& pool() {
  static const std::vector<OwnedColumn> columns = [] {
    std::vector<OwnedColumn> out;
    std::mt19937 rng(20261202u);
    const auto full = test::era5_levels_hpa();
    const auto to100 = test::era5_levels_to_100_hpa();
    for (int i = 0; i < 2000; ++i) out.push_back(test::random_column(rng, full));
    for (int i = 0; i < 1000; ++i) out.push_back(test::random_column(rng, to100));
    return out;
  }();
  return columns;
}

AnalysisSettings settings_for(BuoyancyMode mode) {
  AnalysisSettings s;
  s.buoyancy = mode;
  s.level_fields = true;
  return s;
}

const BuoyancyMode kModes[] = {BuoyancyMode::virtual_temperature, BuoyancyMode::temperature};

/// What the caller of the kernel knows about each level, from METHODS: a level is
/// usable when its pressure, temperature (150-350 K) and humidity are present and
/// it is not below the surface pressure (when one is given).
struct LevelView {
  std::vector<bool> usable;       // above ground, complete, temperature accepted
  std::vector<bool> analysed;     // usable and at or below the analysis top
  std::vector<bool> source;       // analysed and inside the source layer
  double lowest_pa = kNaN;        // pressure of the lowest usable level
  int n_usable = 0;
};

LevelView view_levels(const OwnedColumn& c, const AnalysisSettings& s) {
  LevelView v;
  const int n = c.n();
  v.usable.assign(n, false);
  v.analysed.assign(n, false);
  v.source.assign(n, false);
  const double ps = c.surface_pressure_pa;
  for (int k = 0; k < n; ++k) {
    const double p = c.pressure_pa[k], t = c.temp_k[k], h = c.humidity[k];
    bool ok = std::isfinite(p) && std::isfinite(t) && std::isfinite(h) && t >= 150.0 && t <= 350.0;
    if (ok && std::isfinite(ps) && ps > 0.0 && p > ps) ok = false;
    v.usable[k] = ok;
    if (ok) {
      ++v.n_usable;
      if (!(v.lowest_pa >= p)) v.lowest_pa = p;
    }
  }
  for (int k = 0; k < n; ++k) {
    v.analysed[k] = v.usable[k] && c.pressure_pa[k] >= s.top_pressure_pa;
    v.source[k] = v.analysed[k] && c.pressure_pa[k] >= v.lowest_pa - s.source_layer_pa;
  }
  return v;
}

bool same(double a, double b) {
  if (std::isnan(a) || std::isnan(b)) return std::isnan(a) && std::isnan(b);
  return std::fabs(a - b) <= kSameRel * (1.0 + std::fabs(a) + std::fabs(b));
}

std::string describe(int index, const OwnedColumn& c) {
  std::string s = "column " + std::to_string(index) + " (" + std::to_string(c.n()) +
                  " levels, humidity kind " + std::to_string(static_cast<int>(c.humidity_kind)) +
                  ", surface pressure " + std::to_string(c.surface_pressure_pa) + " Pa)";
  return s;
}

/// Runs body(index, column, view, analyzer, result) over the pool in one mode (and MU rule).
template <class Body>
void for_each_column(BuoyancyMode mode, Body body, MuParcelRule rule = MuParcelRule::max_cape) {
  AnalysisSettings s = settings_for(mode);
  s.mu_parcel = rule;
  ColumnAnalyzer analyzer(s);
  ColumnResult r;
  const auto& columns = pool();
  for (int i = 0; i < static_cast<int>(columns.size()); ++i) {
    const OwnedColumn& c = columns[i];
    analyzer.analyze(c.view(), r);
    body(i, c, view_levels(c, s), analyzer, r);
    if (::testing::Test::HasFatalFailure()) return;
  }
}

// ------------------------------------------------------------------ wet-bulb profile

TEST(ColumnInvariants, WetBulbLiesBetweenDewPointAndTemperature) {
  // METHODS "Wet-bulb quantities": always Td <= Tw <= T.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer&, const ColumnResult& r) {
      for (int k = 0; k < c.n(); ++k) {
        const double tw = r.levels.wet_bulb_temperature_k[k];
        const double td = r.levels.dew_point_k[k];
        if (!v.usable[k] || std::isnan(tw)) continue;
        const double t = c.temp_k[k];
        if (!(td <= tw + kOrderTolK && tw <= t + kOrderTolK) && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << " Pa: Td " << td
                        << " Tw " << tw << " T " << t;
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, SaturationThetaWIsAtLeastThetaW) {
  // METHODS: theta_w_star >= theta_w at the same level.
  long failures = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    for (int k = 0; k < c.n(); ++k) {
                      const double tw = r.levels.wet_bulb_potential_temperature_k[k];
                      const double tws = r.levels.saturation_theta_w_k[k];
                      if (!v.usable[k] || std::isnan(tw) || std::isnan(tws)) continue;
                      if (!(tws >= tw - kOrderTolK) && failures++ < 5)
                        ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k]
                                      << " Pa: theta_w " << tw << " theta_w_star " << tws;
                    }
                  });
  EXPECT_EQ(failures, 0);
}

// ------------------------------------------------------------------ flags and ascents

TEST(ColumnInvariants, LevelFlagIsMaxExcessAboveThreshold) {
  // METHODS: latent flag = "maximum parcel excess > min_excess_k"; no flag where the
  // excess is missing (LCL above the analysis top).
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      for (int k = 0; k < c.n(); ++k) {
        if (!v.analysed[k]) continue;
        const double ex = r.levels.max_parcel_excess_k[k];
        const std::int8_t flag = r.levels.latent_flag[k];
        const bool ok = std::isnan(ex) ? flag != 1 : flag == (ex > a.settings().min_excess_k ? 1 : 0);
        if (!ok && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << " Pa: excess " << ex
                        << " flag " << int(flag);
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, AscentAgreesWithLevelFields) {
  // ascent_from_level gives the same parcel the level fields describe.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      for (int k = 0; k < c.n(); ++k) {
        if (!v.analysed[k]) continue;
        const ParcelAscent asc = a.ascent_from_level(k);
        const bool ok = same(asc.max_excess_k, r.levels.max_parcel_excess_k[k]) &&
                        asc.flagged == (r.levels.latent_flag[k] == 1) &&
                        same(asc.theta_w_k, r.levels.wet_bulb_potential_temperature_k[k]) &&
                        same(asc.source_pressure_pa, c.pressure_pa[k]);
        if (!ok && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << " Pa: ascent excess "
                        << asc.max_excess_k << " flagged " << asc.flagged << " theta_w "
                        << asc.theta_w_k << " vs level fields excess "
                        << r.levels.max_parcel_excess_k[k] << " flag "
                        << int(r.levels.latent_flag[k]) << " theta_w "
                        << r.levels.wet_bulb_potential_temperature_k[k];
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, ParcelHasLfcExactlyWhenFlagged) {
  // METHODS: LFC, EL, CAPE, CIN exist only for flagged parcels; without an LFC,
  // CAPE is 0 and CIN is missing.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult&) {
      for (int k = 0; k < c.n(); ++k) {
        if (!v.analysed[k]) continue;
        const ParcelAscent asc = a.ascent_from_level(k);
        bool ok;
        if (asc.flagged)
          ok = std::isfinite(asc.lfc_pressure_pa) && std::isfinite(asc.el_pressure_pa) &&
               std::isfinite(asc.cape_j_kg) && std::isfinite(asc.cin_j_kg);
        else
          ok = std::isnan(asc.lfc_pressure_pa) && std::isnan(asc.el_pressure_pa) &&
               asc.cape_j_kg == 0.0 && std::isnan(asc.cin_j_kg);
        if (!ok && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << " Pa: flagged "
                        << asc.flagged << " LFC " << asc.lfc_pressure_pa << " EL "
                        << asc.el_pressure_pa << " CAPE " << asc.cape_j_kg << " CIN "
                        << asc.cin_j_kg;
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, CapeAndCinAreNonNegative) {
  // METHODS: CAPE integrates positive buoyancy only; CIN is reported as a positive number.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      if (!(r.mu_cape_j_kg >= 0.0) || r.mu_cin_j_kg < 0.0) {
        if (failures++ < 5)
          ADD_FAILURE() << describe(i, c) << ": MU CAPE " << r.mu_cape_j_kg << " CIN " << r.mu_cin_j_kg;
      }
      for (int k = 0; k < c.n(); ++k) {
        if (!v.source[k]) continue;
        const ParcelAscent asc = a.ascent_from_level(k);
        if ((!(asc.cape_j_kg >= 0.0) || asc.cin_j_kg < 0.0) && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << ": CAPE "
                        << asc.cape_j_kg << " CIN " << asc.cin_j_kg;
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, LfcLiesBetweenSourceAndEquilibriumLevel) {
  // METHODS: the LFC is at or above the LCL, which is at or above the source; the EL
  // is at or above the LFC and at or below the analysis top.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult&) {
      const double top = a.settings().top_pressure_pa;
      for (int k = 0; k < c.n(); ++k) {
        if (!v.analysed[k]) continue;
        const ParcelAscent asc = a.ascent_from_level(k);
        if (!asc.flagged) continue;
        const double src = asc.source_pressure_pa, lcl = asc.lcl_pressure_pa;
        const double lfc = asc.lfc_pressure_pa, el = asc.el_pressure_pa;
        const double eps = 1e-6;  // Pa
        const bool ok = src + eps >= lcl && lcl + eps >= lfc && lfc + eps >= el && el + eps >= top;
        if (!ok && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << ": source " << src
                        << " LCL " << lcl << " LFC " << lfc << " EL " << el << " top " << top;
      }
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, LiftNeededIsNeverNegative) {
  // METHODS: lift = source pressure - LFC pressure, and the LFC is at or above the
  // source, so no lift is negative (not even by rounding: a negative lift would be
  // written to the output field).
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView&,
                              const ColumnAnalyzer&, const ColumnResult& r) {
      if ((r.mu_lift_to_lfc_pa < 0.0 || r.easiest_lift_pa < 0.0 || r.mu_lift_to_lfc_z_m < 0.0) &&
          failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": MU lift " << r.mu_lift_to_lfc_pa << " Pa ("
                      << r.mu_lift_to_lfc_z_m << " m), easiest lift " << r.easiest_lift_pa << " Pa";
    });
    EXPECT_EQ(failures, 0) << "mode " << to_string(mode);
  }
}

TEST(ColumnInvariants, EasiestLiftIsLeastLiftOfFlaggedSourceLevels) {
  // METHODS: the easiest lift is the least lift over the flagged source-layer levels
  // (lowest level on ties), so never more than the MU parcel's lift.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      double least = kNaN, least_p = kNaN;
      // bottom-up over source levels, so that exact ties keep the lowest level
      std::vector<int> order;
      for (int k = 0; k < c.n(); ++k)
        if (v.source[k]) order.push_back(k);
      std::sort(order.begin(), order.end(),
                [&](int x, int y) { return c.pressure_pa[x] > c.pressure_pa[y]; });
      for (int k : order) {
        const ParcelAscent asc = a.ascent_from_level(k);
        if (!asc.flagged) continue;
        const double lift = c.pressure_pa[k] - asc.lfc_pressure_pa;
        if (std::isnan(least) || lift < least) {
          least = lift;
          least_p = c.pressure_pa[k];
        }
      }
      const double tol = 1e-6;  // Pa
      bool ok = (std::isnan(least) ? std::isnan(r.easiest_lift_pa)
                                   : std::fabs(r.easiest_lift_pa - least) <= tol) &&
                same(r.easiest_lift_pressure_pa, least_p);
      if (std::isfinite(r.mu_lift_to_lfc_pa)) ok = ok && r.easiest_lift_pa <= r.mu_lift_to_lfc_pa + tol;
      if (!ok && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": MU lift " << r.mu_lift_to_lfc_pa << " easiest "
                      << r.easiest_lift_pa << " at " << r.easiest_lift_pressure_pa
                      << ", expected easiest " << least << " at " << least_p;
    });
    EXPECT_EQ(failures, 0) << "mode " << to_string(mode);
  }
}

TEST(ColumnInvariants, TangentTestAgreesWithAscentFlagInTemperatureMode) {
  // METHODS "Latent instability": in temperature mode the flag equals the graphical
  // tangent test (theta_w of the level > min theta_w_star over levels at or above
  // its LCL), except where the maximum excess falls between two levels (the
  // pseudo-adiabat bows above the chord by a few hundredths of a kelvin) and, by the
  // METHODS rule for parcels arriving warm at their LCL, at the LCL point itself.
  // Disagreements are allowed only where the excess is that small.
  constexpr double kBowBoundK = 0.1;  // "a few hundredths", more aloft (METHODS)
  double worst_missed_by_graph = 0.0;   // flagged, graphical test says no: max excess
  double worst_missed_by_flag = 0.0;    // graphical test says yes, not flagged: theta_w margin
  double worst_warm_at_lcl = 0.0;       // flagged with LFC at the LCL, graphical says no
  long levels = 0, disagreements = 0, failures = 0;
  for_each_column(BuoyancyMode::temperature, [&](int i, const OwnedColumn& c, const LevelView& v,
                                                const ColumnAnalyzer& a, const ColumnResult& r) {
    for (int k = 0; k < c.n(); ++k) {
      if (!v.analysed[k]) continue;
      const ParcelAscent asc = a.ascent_from_level(k);
      if (std::isnan(asc.max_excess_k)) continue;
      double min_star = kNaN;
      for (int j = 0; j < c.n(); ++j)
        if (v.analysed[j] && c.pressure_pa[j] <= asc.lcl_pressure_pa) {
          const double s = r.levels.saturation_theta_w_k[j];
          if (std::isnan(min_star) || s < min_star) min_star = s;
        }
      if (std::isnan(min_star)) continue;  // no level between the LCL and the top
      ++levels;
      const double margin = r.levels.wet_bulb_potential_temperature_k[k] - min_star;
      const bool graphical = margin > 0.0;
      if (graphical == asc.flagged) continue;
      ++disagreements;
      if (asc.flagged) {
        const bool warm_at_lcl = std::fabs(asc.lfc_pressure_pa - asc.lcl_pressure_pa) < 1e-6;
        if (warm_at_lcl) {
          worst_warm_at_lcl = std::max(worst_warm_at_lcl, asc.max_excess_k);
          continue;
        }
        worst_missed_by_graph = std::max(worst_missed_by_graph, asc.max_excess_k);
        if (asc.max_excess_k > kBowBoundK && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k]
                        << " Pa flagged with excess " << asc.max_excess_k
                        << " K but theta_w " << r.levels.wet_bulb_potential_temperature_k[k]
                        << " <= min theta_w_star above the LCL " << min_star;
      } else {
        worst_missed_by_flag = std::max(worst_missed_by_flag, margin);
        if (margin > kBowBoundK && failures++ < 5)
          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k]
                        << " Pa not flagged (excess " << asc.max_excess_k << " K) but theta_w "
                        << r.levels.wet_bulb_potential_temperature_k[k]
                        << " exceeds min theta_w_star above the LCL " << min_star;
      }
    }
  });
  std::printf("[ tangent ] %ld levels, %ld disagreements; largest excess of a flag the graphical "
              "test misses %.4f K; largest theta_w margin of a graphical flag the ascent misses "
              "%.4f K; largest excess of a parcel warm at its LCL the graphical test misses %.4f K\n",
              levels, disagreements, worst_missed_by_graph, worst_missed_by_flag, worst_warm_at_lcl);
  ::testing::Test::RecordProperty("largest_missed_by_graph_k", std::to_string(worst_missed_by_graph));
  ::testing::Test::RecordProperty("largest_missed_by_flag_k", std::to_string(worst_missed_by_flag));
  EXPECT_EQ(failures, 0);
  EXPECT_LT(disagreements, levels / 50 + 1) << "disagreement must be the exception";
}

// ------------------------------------------------------------------ column outputs

TEST(ColumnInvariants, TangentIsMinimumSaturationThetaWOfAnalysedLevels) {
  // METHODS: tangent_theta_w = min theta_w_star over the above-ground levels up to
  // the top; tangent_pressure = where it is reached (the lowest level on ties).
  long failures = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    if (v.n_usable < 3) return;
                    double best = kNaN, best_p = kNaN;
                    for (int k = 0; k < c.n(); ++k) {
                      if (!v.analysed[k]) continue;
                      const double s = r.levels.saturation_theta_w_k[k];
                      if (std::isnan(best) || s < best || (s == best && c.pressure_pa[k] > best_p)) {
                        best = s;
                        best_p = c.pressure_pa[k];
                      }
                    }
                    if ((!same(r.tangent_theta_w_k, best) || !same(r.tangent_pressure_pa, best_p)) &&
                        failures++ < 5)
                      ADD_FAILURE() << describe(i, c) << ": tangent " << r.tangent_theta_w_k << " K at "
                                    << r.tangent_pressure_pa << " Pa, min theta_w_star " << best
                                    << " at " << best_p;
                  });
  EXPECT_EQ(failures, 0);
}

/// True when the column result's MU fields are those of the ascent from input level k.
bool mu_fields_are_ascent(const ColumnResult& r, const OwnedColumn& c, int k, const ParcelAscent& asc) {
  return same(r.mu_pressure_pa, c.pressure_pa[k]) &&
         same(r.mu_theta_w_k, r.levels.wet_bulb_potential_temperature_k[k]) &&
         same(r.mu_cape_j_kg, asc.cape_j_kg) && same(r.mu_cin_j_kg, asc.cin_j_kg) &&
         same(r.mu_lfc_pressure_pa, asc.lfc_pressure_pa) && same(r.mu_el_pressure_pa, asc.el_pressure_pa) &&
         same(r.mu_lift_to_lfc_pa, asc.flagged ? c.pressure_pa[k] - asc.lfc_pressure_pa : kNaN);
}

/// The source-layer level with the largest theta_w (ties: the lowest), -1 if none.
int largest_theta_w_level(const OwnedColumn& c, const LevelView& v, const ColumnResult& r) {
  int mu = -1;
  for (int k = 0; k < c.n(); ++k) {
    if (!v.source[k]) continue;
    const double tw = r.levels.wet_bulb_potential_temperature_k[k];
    if (mu < 0) {
      mu = k;
      continue;
    }
    const double best = r.levels.wet_bulb_potential_temperature_k[mu];
    if (tw > best || (tw == best && c.pressure_pa[k] > c.pressure_pa[mu])) mu = k;
  }
  return mu;
}

TEST(ColumnInvariants, MostUnstableParcelHasLargestCapeOfFlaggedSourceParcels) {
  // METHODS: MU parcel = the flagged source-layer parcel with the largest CAPE (exact ties:
  // the lowest level). Checked against every flagged parcel lifted on its own
  // (ascent_from_level), so a parcel the kernel skipped as bounded would show here.
  for (BuoyancyMode mode : kModes) {
    long failures = 0, columns = 0, not_lowest_theta_w = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      if (v.n_usable < 3) return;
      int mu = -1;
      ParcelAscent best{};
      for (int k = 0; k < c.n(); ++k) {
        if (!v.source[k] || r.levels.latent_flag[k] != 1) continue;
        const ParcelAscent asc = a.ascent_from_level(k);
        if (mu < 0 || asc.cape_j_kg > best.cape_j_kg ||
            (asc.cape_j_kg == best.cape_j_kg && c.pressure_pa[k] > c.pressure_pa[mu])) {
          mu = k;
          best = asc;
        }
      }
      if (mu < 0) return;
      ++columns;
      if (mu != largest_theta_w_level(c, v, r)) ++not_lowest_theta_w;
      if (!mu_fields_are_ascent(r, c, mu, best) && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": MU at " << r.mu_pressure_pa << " Pa CAPE " << r.mu_cape_j_kg
                      << "; expected level " << c.pressure_pa[mu] << " Pa CAPE " << best.cape_j_kg;
    });
    EXPECT_EQ(failures, 0);
    // the pool must hold columns where the CAPE rule and the theta_w rule part
    EXPECT_GT(not_lowest_theta_w, 0);
    std::printf("[ mu rule ] mode %s: %ld columns with a flagged source parcel, %ld where the largest "
                "CAPE is not the largest theta_w\n",
                to_string(mode), columns, not_lowest_theta_w);
  }
}

TEST(ColumnInvariants, MostUnstableParcelHasLargestThetaWWhereNoSourceParcelIsFlagged) {
  // METHODS: without a flagged source-layer parcel the MU parcel is the largest theta_w
  // (ties: lowest), with no LFC and CAPE 0.
  for (BuoyancyMode mode : kModes) {
    long failures = 0, seen = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      if (v.n_usable < 3) return;
      for (int k = 0; k < c.n(); ++k)
        if (v.source[k] && r.levels.latent_flag[k] == 1) return;
      const int mu = largest_theta_w_level(c, v, r);
      ASSERT_GE(mu, 0) << describe(i, c);
      ++seen;
      const ParcelAscent asc = a.ascent_from_level(mu);
      const bool ok = mu_fields_are_ascent(r, c, mu, asc) && r.mu_cape_j_kg == 0.0 &&
                      std::isnan(r.mu_lfc_pressure_pa);
      if (!ok && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": MU at " << r.mu_pressure_pa << " Pa, expected "
                      << c.pressure_pa[mu] << " Pa";
    });
    EXPECT_GT(seen, 0);
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, MaxThetaWRuleChoosesLargestThetaWOfSourceLayer) {
  // METHODS: with analysis.mu_parcel = max_theta_w the MU parcel is the source-layer level
  // with the largest theta_w (ties: lowest) in every column; its CAPE, CIN, LFC and EL are
  // those of its ascent.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(
        mode,
        [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer& a, const ColumnResult& r) {
          if (v.n_usable < 3) return;
          const int mu = largest_theta_w_level(c, v, r);
          ASSERT_GE(mu, 0) << describe(i, c);
          const ParcelAscent asc = a.ascent_from_level(mu);
          if (!mu_fields_are_ascent(r, c, mu, asc) && failures++ < 5)
            ADD_FAILURE() << describe(i, c) << ": MU at " << r.mu_pressure_pa << " Pa theta_w "
                          << r.mu_theta_w_k << "; expected level " << c.pressure_pa[mu] << " theta_w "
                          << r.levels.wet_bulb_potential_temperature_k[mu];
        },
        MuParcelRule::max_theta_w);
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, LatentClassIsAtLeastPseudoLatentExactlyWhenASourceParcelIsFlagged) {
  // METHODS: with the CAPE rule latent_class >= 1 exactly where some source-layer parcel is
  // flagged (in step with latent_layer_depth > 0).
  for (BuoyancyMode mode : kModes) {
    long failures = 0, flagged_columns = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                              const ColumnResult& r) {
      if (v.n_usable < 3) return;
      bool any = false;
      for (int k = 0; k < c.n(); ++k) any = any || (v.source[k] && r.levels.latent_flag[k] == 1);
      flagged_columns += any ? 1 : 0;
      const bool latent = r.latent_class >= 1;
      if ((latent != any || latent != (r.latent_layer_depth_pa > 0.0)) && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": flagged source parcel " << any << ", latent_class "
                      << int(r.latent_class) << ", latent_layer_depth " << r.latent_layer_depth_pa;
    });
    EXPECT_GT(flagged_columns, 0);
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, LatentClassFollowsCapeAndCin) {
  // METHODS (Normand's classes): none without LFC, pseudo-latent when CAPE <= CIN,
  // real-latent when CAPE > CIN.
  for (BuoyancyMode mode : kModes) {
    long failures = 0, counts[3] = {0, 0, 0};
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer&, const ColumnResult& r) {
      if (v.n_usable < 3) return;
      LatentClass expected = LatentClass::none;
      if (std::isfinite(r.mu_lfc_pressure_pa))
        expected = r.mu_cape_j_kg > r.mu_cin_j_kg ? LatentClass::real_latent : LatentClass::pseudo_latent;
      if (r.latent_class >= 0 && r.latent_class <= 2) ++counts[r.latent_class];
      if (r.latent_class != static_cast<std::int8_t>(expected) && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": class " << int(r.latent_class) << " CAPE "
                      << r.mu_cape_j_kg << " CIN " << r.mu_cin_j_kg << " LFC " << r.mu_lfc_pressure_pa;
    });
    EXPECT_EQ(failures, 0);
    // the pool is meant to exercise all three classes
    EXPECT_GT(counts[0], 0);
    EXPECT_GT(counts[1], 0);
    EXPECT_GT(counts[2], 0);
    std::printf("[ classes ] mode %s: none %ld, pseudo-latent %ld, real-latent %ld\n",
                to_string(mode), counts[0], counts[1], counts[2]);
  }
}

TEST(ColumnInvariants, LatentLayerExistsExactlyWhenASourceLevelIsFlagged) {
  // METHODS: layers are runs of flagged source-layer levels; a flagged level gives a
  // layer of positive depth; the lowest layer lies inside the source layer.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer& a, const ColumnResult& r) {
      if (v.n_usable < 3) return;
      bool any = false;
      for (int k = 0; k < c.n(); ++k) any = any || (v.source[k] && r.levels.latent_flag[k] == 1);
      bool ok;
      if (any) {
        const double source_top = v.lowest_pa - a.settings().source_layer_pa;
        const double eps = 1e-6;
        ok = r.latent_layer_depth_pa > 0.0 && r.latent_layer_bottom_pa <= v.lowest_pa + eps &&
             r.latent_layer_bottom_pa > r.latent_layer_top_pa &&
             r.latent_layer_top_pa >= source_top - eps &&
             r.latent_layer_depth_pa + eps >= r.latent_layer_bottom_pa - r.latent_layer_top_pa &&
             r.latent_layer_depth_pa <= a.settings().source_layer_pa + eps;
        if (c.with_heights) ok = ok && r.latent_layer_depth_z_m > 0.0;
        else ok = ok && std::isnan(r.latent_layer_depth_z_m);
      } else {
        ok = !(r.latent_layer_depth_pa > 0.0) && std::isnan(r.latent_layer_bottom_pa) &&
             std::isnan(r.latent_layer_top_pa) && !(r.latent_layer_depth_z_m > 0.0);
      }
      if (!ok && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": flagged source level " << any << ", depth "
                      << r.latent_layer_depth_pa << " Pa (" << r.latent_layer_depth_z_m
                      << " m), bottom " << r.latent_layer_bottom_pa << " top " << r.latent_layer_top_pa;
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, ColumnWithoutLatentLayerReportsZeroDepth) {
  // Decision (METHODS is silent): the depth is a total over layers, so an analysed
  // column without any layer has depth 0 (a measurement, counted by climatologies),
  // while bottom and top are missing.
  long failures = 0, seen = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    if (v.n_usable < 3 || !std::isnan(r.latent_layer_bottom_pa)) return;
                    ++seen;
                    if (r.latent_layer_depth_pa != 0.0 && failures++ < 5)
                      ADD_FAILURE() << describe(i, c) << ": no layer but depth "
                                    << r.latent_layer_depth_pa;
                  });
  EXPECT_GT(seen, 0);
  EXPECT_EQ(failures, 0);
}

TEST(ColumnInvariants, AnalysedColumnHasNoMissingCoreOutput) {
  // Every analysed column has a tangent adiabat, an MU parcel and a class; the
  // quantities of a parcel without LFC are missing (CAPE 0), as METHODS says.
  for (BuoyancyMode mode : kModes) {
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView& v,
                              const ColumnAnalyzer&, const ColumnResult& r) {
      if (v.n_usable < 3) return;
      bool ok = std::isfinite(r.tangent_theta_w_k) && std::isfinite(r.tangent_pressure_pa) &&
                std::isfinite(r.mu_pressure_pa) && std::isfinite(r.mu_theta_w_k) &&
                std::isfinite(r.mu_cape_j_kg) && r.latent_class >= 0 && r.latent_class <= 2 &&
                r.qc.columns_analysed == 1 && r.qc.columns_skipped == 0;
      const bool lfc = std::isfinite(r.mu_lfc_pressure_pa);
      ok = ok && lfc == std::isfinite(r.mu_el_pressure_pa) && lfc == std::isfinite(r.mu_cin_j_kg) &&
           lfc == std::isfinite(r.mu_lift_to_lfc_pa) && (lfc || r.mu_cape_j_kg == 0.0);
      if (lfc) ok = ok && (c.with_heights == std::isfinite(r.mu_lift_to_lfc_z_m));
      else ok = ok && std::isnan(r.mu_lift_to_lfc_z_m);
      ok = ok && std::isfinite(r.easiest_lift_pa) == std::isfinite(r.easiest_lift_pressure_pa);
      if (!ok && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": tangent " << r.tangent_theta_w_k << " MU "
                      << r.mu_pressure_pa << " CAPE " << r.mu_cape_j_kg << " CIN " << r.mu_cin_j_kg
                      << " LFC " << r.mu_lfc_pressure_pa << " EL " << r.mu_el_pressure_pa
                      << " lift " << r.mu_lift_to_lfc_pa << " / " << r.mu_lift_to_lfc_z_m
                      << " m, class " << int(r.latent_class);
    });
    EXPECT_EQ(failures, 0);
  }
}

TEST(ColumnInvariants, LevelFieldsMissingExactlyAtUnusableLevels) {
  // METHODS: below-ground and unusable levels are excluded; level fields are NaN /
  // kByteMissing there, and present at every usable level up to the analysis top.
  long failures = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    const LevelFields& f = r.levels;
                    for (int k = 0; k < c.n(); ++k) {
                      const bool present[] = {
                          std::isfinite(f.wet_bulb_temperature_k[k]),
                          std::isfinite(f.wet_bulb_potential_temperature_k[k]),
                          std::isfinite(f.saturation_theta_w_k[k]), std::isfinite(f.dew_point_k[k])};
                      bool ok = true;
                      if (!v.usable[k] || v.n_usable < 3) {
                        for (bool p : present) ok = ok && !p;
                        ok = ok && std::isnan(f.max_parcel_excess_k[k]) &&
                             f.latent_flag[k] == kByteMissing && f.stability_class[k] == kByteMissing &&
                             f.potential_instability[k] == kByteMissing;
                      } else if (v.analysed[k]) {
                        for (bool p : present) ok = ok && p;
                        ok = ok && f.latent_flag[k] != kByteMissing;
                      }
                      if (!ok && failures++ < 5)
                        ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k]
                                      << " Pa (usable " << v.usable[k] << "): Tw "
                                      << f.wet_bulb_temperature_k[k] << " theta_w "
                                      << f.wet_bulb_potential_temperature_k[k] << " theta_w* "
                                      << f.saturation_theta_w_k[k] << " Td " << f.dew_point_k[k]
                                      << " excess " << f.max_parcel_excess_k[k] << " flag "
                                      << int(f.latent_flag[k]) << " class "
                                      << int(f.stability_class[k]);
                    }
                  });
  EXPECT_EQ(failures, 0);
}

TEST(ColumnInvariants, ResultDoesNotDependOnLevelOrder) {
  // ColumnInput: "Arrays ... in either vertical order". Reversing the levels must give
  // the same column outputs and the same level fields, reversed.
  for (BuoyancyMode mode : kModes) {
    ColumnAnalyzer other(settings_for(mode));
    ColumnResult rr;
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView&,
                              const ColumnAnalyzer&, const ColumnResult& r) {
      if (i % 3 != 0) return;  // a third of the pool is plenty
      const OwnedColumn rev = c.reversed();
      other.analyze(rev.view(), rr);
      const double a[] = {r.latent_layer_depth_pa, r.latent_layer_depth_z_m, r.latent_layer_bottom_pa,
                          r.latent_layer_top_pa, r.tangent_theta_w_k, r.tangent_pressure_pa,
                          r.mu_pressure_pa, r.mu_theta_w_k, r.mu_cape_j_kg, r.mu_cin_j_kg,
                          r.mu_lfc_pressure_pa, r.mu_el_pressure_pa, r.mu_lift_to_lfc_pa,
                          r.mu_lift_to_lfc_z_m, r.easiest_lift_pa, r.easiest_lift_pressure_pa};
      const double b[] = {rr.latent_layer_depth_pa, rr.latent_layer_depth_z_m, rr.latent_layer_bottom_pa,
                          rr.latent_layer_top_pa, rr.tangent_theta_w_k, rr.tangent_pressure_pa,
                          rr.mu_pressure_pa, rr.mu_theta_w_k, rr.mu_cape_j_kg, rr.mu_cin_j_kg,
                          rr.mu_lfc_pressure_pa, rr.mu_el_pressure_pa, rr.mu_lift_to_lfc_pa,
                          rr.mu_lift_to_lfc_z_m, rr.easiest_lift_pa, rr.easiest_lift_pressure_pa};
      bool ok = r.latent_class == rr.latent_class;
      int bad = -1;
      for (int q = 0; q < 16; ++q)
        if (!same(a[q], b[q])) { ok = false; bad = q; }
      const int n = c.n();
      for (int k = 0; k < n && ok; ++k) {
        const int m = n - 1 - k;
        ok = same(r.levels.wet_bulb_potential_temperature_k[k], rr.levels.wet_bulb_potential_temperature_k[m]) &&
             same(r.levels.saturation_theta_w_k[k], rr.levels.saturation_theta_w_k[m]) &&
             same(r.levels.max_parcel_excess_k[k], rr.levels.max_parcel_excess_k[m]) &&
             r.levels.latent_flag[k] == rr.levels.latent_flag[m] &&
             r.levels.stability_class[k] == rr.levels.stability_class[m] &&
             r.levels.potential_instability[k] == rr.levels.potential_instability[m];
        if (!ok) bad = 100 + k;
      }
      if (!ok && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": reversed levels differ (output index " << bad
                      << (bad >= 0 && bad < 16 ? ": " + std::to_string(a[bad]) + " vs " + std::to_string(b[bad]) : "")
                      << ")";
    });
    EXPECT_EQ(failures, 0);
  }
}

/// Column outputs as an array, for exact comparisons between two runs.
std::vector<double> outputs_of(const ColumnResult& r) {
  return {r.latent_layer_depth_pa, r.latent_layer_depth_z_m, r.latent_layer_bottom_pa,
          r.latent_layer_top_pa, r.tangent_theta_w_k, r.tangent_pressure_pa, r.mu_pressure_pa,
          r.mu_theta_w_k, r.mu_cape_j_kg, r.mu_cin_j_kg, r.mu_lfc_pressure_pa, r.mu_el_pressure_pa,
          r.mu_lift_to_lfc_pa, r.mu_lift_to_lfc_z_m, r.easiest_lift_pa, r.easiest_lift_pressure_pa,
          static_cast<double>(r.latent_class), static_cast<double>(r.qc.columns_analysed)};
}

/// Quality-control counts as an array.
std::vector<double> qc_of(const ColumnResult& r) {
  return {static_cast<double>(r.qc.columns_analysed), static_cast<double>(r.qc.columns_skipped),
          static_cast<double>(r.qc.humidity_clipped), static_cast<double>(r.qc.dew_point_corrected),
          static_cast<double>(r.qc.temperature_rejected)};
}

bool identical(const std::vector<double>& a, const std::vector<double>& b, int* where) {
  for (size_t q = 0; q < a.size(); ++q)
    if (!((std::isnan(a[q]) && std::isnan(b[q])) || a[q] == b[q])) {
      *where = static_cast<int>(q);
      return false;
    }
  return true;
}

TEST(ColumnInvariants, ColumnOutputsDoNotDependOnLevelFields) {
  // --level-fields adds per-level outputs; it must not change the 2-D fields.
  for (BuoyancyMode mode : kModes) {
    AnalysisSettings plain = settings_for(mode);
    plain.level_fields = false;
    ColumnAnalyzer other(plain);
    ColumnResult r2;
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView&, const ColumnAnalyzer&,
                              const ColumnResult& r) {
      other.analyze(c.view(), r2);
      int q = -1;
      if (!identical(outputs_of(r), outputs_of(r2), &q) && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": output " << q << " is " << outputs_of(r)[q]
                      << " with level fields, " << outputs_of(r2)[q] << " without";
    });
    EXPECT_EQ(failures, 0) << "mode " << to_string(mode);
  }
}

TEST(ColumnInvariants, QcCountsDoNotDependOnLevelFields) {
  // The QC counts go to the output attributes and the run summary: the same input
  // must give the same counts whether or not --level-fields is asked for.
  for (BuoyancyMode mode : kModes) {
    AnalysisSettings plain = settings_for(mode);
    plain.level_fields = false;
    ColumnAnalyzer other(plain);
    ColumnResult r2;
    long failures = 0;
    for_each_column(mode, [&](int i, const OwnedColumn& c, const LevelView&, const ColumnAnalyzer&,
                              const ColumnResult& r) {
      other.analyze(c.view(), r2);
      int q = -1;
      if (!identical(qc_of(r), qc_of(r2), &q) && failures++ < 5)
        ADD_FAILURE() << describe(i, c) << ": QC count " << q << " (analysed, skipped, humidity "
                      << "clipped, dew point corrected, temperature rejected) is " << qc_of(r)[q]
                      << " with level fields, " << qc_of(r2)[q] << " without";
    });
    EXPECT_EQ(failures, 0) << "mode " << to_string(mode);
  }
}

TEST(ColumnInvariants, ReusedAnalyzerGivesSameResultAsFreshOne) {
  // ColumnAnalyzer keeps scratch space between columns: nothing of one column may leak
  // into the next.
  const auto& columns = pool();
  for (BuoyancyMode mode : kModes) {
    const AnalysisSettings s = settings_for(mode);
    ColumnAnalyzer reused(s);
    ColumnResult r;
    long failures = 0;
    for (int i = 0; i < static_cast<int>(columns.size()); i += 7) {
      reused.analyze(columns[i].view(), r);
      const ColumnResult fresh = analyze_column(columns[i].view(), s);
      int q = -1;
      bool ok = identical(outputs_of(r), outputs_of(fresh), &q);
      for (int k = 0; k < columns[i].n() && ok; ++k)
        ok = same(r.levels.max_parcel_excess_k[k], fresh.levels.max_parcel_excess_k[k]) &&
             r.levels.latent_flag[k] == fresh.levels.latent_flag[k];
      if (!ok && failures++ < 5) ADD_FAILURE() << describe(i, columns[i]) << ": differs (output " << q << ")";
    }
    EXPECT_EQ(failures, 0) << "mode " << to_string(mode);
  }
}

TEST(ColumnInvariants, LargerMinExcessFlagsNoMoreLevels) {
  // METHODS: "a larger min_excess_k raises the bar for a flag": the flagged levels with
  // 0.5 K are a subset of those with the default, and the layer depth does not grow.
  AnalysisSettings strict = settings_for(BuoyancyMode::virtual_temperature);
  strict.min_excess_k = 0.5;
  ColumnAnalyzer other(strict);
  ColumnResult rs;
  long failures = 0, dropped = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    other.analyze(c.view(), rs);
                    bool ok = !(rs.latent_layer_depth_pa > r.latent_layer_depth_pa + 1e-6);
                    for (int k = 0; k < c.n(); ++k) {
                      if (!v.analysed[k]) continue;
                      if (rs.levels.latent_flag[k] == 1 && r.levels.latent_flag[k] != 1) ok = false;
                      if (rs.levels.latent_flag[k] != 1 && r.levels.latent_flag[k] == 1) ++dropped;
                    }
                    if (!ok && failures++ < 5)
                      ADD_FAILURE() << describe(i, c) << ": min_excess 0.5 K flags more (depth "
                                    << rs.latent_layer_depth_pa << " vs " << r.latent_layer_depth_pa << ")";
                  });
  EXPECT_EQ(failures, 0);
  EXPECT_GT(dropped, 0) << "the stricter threshold should drop some flags";
}

TEST(ColumnInvariants, PotentialInstabilityMarksThetaWDecreasingUpward) {
  // METHODS "Static stability": potential (convective) instability of the layer from a
  // level to the next level above is 1 where theta_w decreases upward, else 0; like the
  // stability class it is missing wherever either level of the layer is unusable.
  long failures = 0, checked = 0, missing = 0;
  for_each_column(BuoyancyMode::virtual_temperature,
                  [&](int i, const OwnedColumn& c, const LevelView& v, const ColumnAnalyzer&,
                      const ColumnResult& r) {
                    if (v.n_usable < 3) return;
                    std::vector<int> up;  // every level with a pressure, bottom-up
                    for (int k = 0; k < c.n(); ++k)
                      if (std::isfinite(c.pressure_pa[k])) up.push_back(k);
                    std::sort(up.begin(), up.end(), [&](int a, int b) { return c.pressure_pa[a] > c.pressure_pa[b]; });
                    for (size_t j = 0; j + 1 < up.size(); ++j) {
                      const int k = up[j], above = up[j + 1];
                      if (!v.analysed[k]) continue;
                      if (!v.usable[above]) {
                        ++missing;
                        if (r.levels.potential_instability[k] != kByteMissing && failures++ < 5)
                          ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k]
                                        << ": the level above is unusable, yet potential instability is "
                                        << int(r.levels.potential_instability[k]);
                        continue;
                      }
                      const double tw = r.levels.wet_bulb_potential_temperature_k[k];
                      const double tw_above = r.levels.wet_bulb_potential_temperature_k[above];
                      if (std::isnan(tw_above)) continue;
                      ++checked;
                      const int expected = tw_above < tw ? 1 : 0;
                      if (r.levels.potential_instability[k] != expected && failures++ < 5)
                        ADD_FAILURE() << describe(i, c) << " level " << c.pressure_pa[k] << ": theta_w "
                                      << tw << " below " << tw_above << ", potential instability "
                                      << int(r.levels.potential_instability[k]);
                    }
                  });
  EXPECT_GT(checked, 0);
  EXPECT_GT(missing, 0) << "the random columns should include unusable levels";
  EXPECT_EQ(failures, 0);
}

TEST(ColumnInvariants, AnalyzersInConcurrentThreadsMatchSerialResults) {
  // One ColumnAnalyzer per thread over the shared (immutable) pseudo-adiabat table, as
  // the grid driver does: results must equal a serial run.
  const auto& columns = pool();
  const AnalysisSettings s = settings_for(BuoyancyMode::virtual_temperature);
  std::vector<std::vector<double>> serial(columns.size()), threaded(columns.size());
  {
    ColumnAnalyzer a(s);
    ColumnResult r;
    for (size_t i = 0; i < columns.size(); ++i) {
      a.analyze(columns[i].view(), r);
      serial[i] = outputs_of(r);
    }
  }
  std::vector<std::thread> workers;
  for (int t = 0; t < 4; ++t)
    workers.emplace_back([&, t] {
      ColumnAnalyzer a(s);
      ColumnResult r;
      for (size_t i = static_cast<size_t>(t); i < columns.size(); i += 4) {
        a.analyze(columns[i].view(), r);
        threaded[i] = outputs_of(r);
      }
    });
  for (auto& w : workers) w.join();
  long failures = 0;
  for (size_t i = 0; i < columns.size(); ++i) {
    int q = -1;
    if (!identical(serial[i], threaded[i], &q) && failures++ < 5)
      ADD_FAILURE() << describe(static_cast<int>(i), columns[i]) << ": output " << q << " differs";
  }
  EXPECT_EQ(failures, 0);
}

}  // namespace
}  // namespace latentlift
