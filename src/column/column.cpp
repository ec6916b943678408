// The column analysis: Normand's latent instability for one column.
//
// How one parcel is followed (METHODS of the README):
//  1. its source level gives T, mixing ratio r and dew point; it rises dry-
//     adiabatically (Poisson, Bolton kappa) to its LCL (Bolton 1980, eq. 15);
//  2. from the LCL on it rides the pseudo-adiabat labelled by its wet-bulb
//     potential temperature theta_w (table look-ups, pseudoadiabat::Table);
//  3. at any pressure above its LCL the parcel is buoyant exactly when its
//     theta_w exceeds the "saturation theta_w" of the environment there: the
//     label of the pseudo-adiabat whose (virtual) temperature equals the
//     environment's. That per-level value is computed once per column, and
//     between two levels it is represented by a parabola in ln p through the
//     two levels and the layer midpoint (the pseudo-adiabat bows against the
//     environment's straight chord). Flags, LFC and EL of every parcel are then
//     comparisons and running minima, O(levels) per column;
//  4. only some parcels get an explicit ascent: the candidates for the most-unstable
//     parcel (flagged source-layer parcels not bounded by another's CAPE, see
//     most_unstable.hpp) and those whose excess is needed for a layer boundary or a
//     level field: buoyancy (K) evaluated along the parcel's pseudo-adiabat with
//     one table look-up per point (walk): on each piece of the ascent (a layer, split at the LCL) the
//     buoyancy is the parabola through the piece's ends and midpoint, whose
//     maximum and positive / negative areas are exact; CAPE and CIN follow.
//
// Reading order: load -> build_analysis_column -> init_parcel (LCL, theta_w, flag,
// find_lfc) -> full_ascent (walk, find_el) -> most_unstable_by_cape -> analyze (MU
// parcel, easiest lift, layers) -> fill_level_fields.
#include "latentlift/column.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <memory>
#include <limits>
#include <numeric>
#include <stdexcept>

#include "latentlift/pseudoadiabat.hpp"
#include "latentlift/thermo.hpp"
#include "column/most_unstable.hpp"

namespace latentlift {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kMinValidTempK = 150.0;  // METHODS "Quality control"
constexpr double kMaxValidTempK = 350.0;
constexpr double kMinRelativeHumidity = 1e-4;  // floor for zero/negative humidity (counted as clipped)
constexpr double kNearThresholdK = 0.05;  // theta_w margin inside which a flag is decided by explicit ascent
constexpr double kThetaTieK = 2e-3;       // theta_w differences below the tables' accuracy count as ties
constexpr int kMinUsableLevels = 3;       // METHODS: fewer usable levels -> missing values
constexpr double kNeutralBandKPerM = 0.1e-3;  // 0.1 K per km of layer thickness

using pseudoadiabat::Table;

// f(s) = a + b s + c s^2 on s in [0, 1], through f(0), f(1/2), f(1).
struct Quadratic {
  double a = 0, b = 0, c = 0;
  static Quadratic through(double f0, double fm, double f1) {
    Quadratic q;
    q.a = f0;
    q.c = 2.0 * (f0 - 2.0 * fm + f1);
    q.b = f1 - f0 - q.c;
    return q;
  }
  double at(double s) const { return a + s * (b + s * c); }
  // Minimum over [s0, s1].
  double min_on(double s0, double s1) const {
    double m = std::min(at(s0), at(s1));
    if (c > 0) {
      const double v = -b / (2 * c);
      if (v > s0 && v < s1) m = std::min(m, at(v));
    }
    return m;
  }
  // Maximum over [s0, s1].
  double max_on(double s0, double s1) const {
    double m = std::max(at(s0), at(s1));
    if (c < 0) {
      const double v = -b / (2 * c);
      if (v > s0 && v < s1) m = std::max(m, at(v));
    }
    return m;
  }
  // Integral over [s0, s1] of the positive part of f (positive == true) or of -f where f < 0.
  double signed_area(double s0, double s1, bool positive) const {
    if (s1 <= s0) return 0.0;
    double cuts[4] = {s0, 0, 0, 0};
    int n = 1;
    double r[2];
    const int m = roots(0.0, s0, s1, r);
    for (int i = 0; i < m; ++i) cuts[n++] = r[i];
    cuts[n++] = s1;
    double total = 0.0;
    for (int i = 0; i + 1 < n; ++i) {
      const double u0 = cuts[i], u1 = cuts[i + 1];
      if (u1 <= u0) continue;
      const double mid = at(0.5 * (u0 + u1));
      if (positive ? mid <= 0 : mid >= 0) continue;
      const double integral = a * (u1 - u0) + b / 2 * (u1 * u1 - u0 * u0) + c / 3 * (u1 * u1 * u1 - u0 * u0 * u0);
      total += positive ? integral : -integral;
    }
    return total;
  }
  // Roots of f(s) = y in [s0, s1], ascending; returns their count (0..2).
  int roots(double y, double s0, double s1, double out[2]) const {
    int n = 0;
    double r[2];
    const double cc = a - y;
    if (std::fabs(c) < 1e-12) {
      if (b != 0) r[n++] = -cc / b;
    } else {
      const double disc = b * b - 4 * c * cc;
      if (disc >= 0) {
        const double sq = std::sqrt(disc);
        const double q = -0.5 * (b + (b >= 0 ? sq : -sq));
        r[n++] = q / c;
        if (q != 0) r[n++] = cc / q;
      }
    }
    int m = 0;
    for (int i = 0; i < n; ++i)
      if (r[i] >= s0 && r[i] <= s1) out[m++] = r[i];
    if (m == 2 && out[0] > out[1]) std::swap(out[0], out[1]);
    return m;
  }
};

// One usable level of the column, ordered from the bottom (highest pressure) up.
struct Level {
  int index;            // input level index; -1 for the interpolated analysis top
  double p, lnp, t, r, tv, z;
  double e;             // vapour pressure, Pa
  double sat;           // saturation theta_w in the buoyancy mode (parcel buoyant iff theta_w > sat)
  double sat_eps;       // the same for an excess of min_excess_k
  double theta_w_star;  // from the temperature (tangent adiabat, level fields)
  const Table::Row* row;  // the tables cut at this pressure (null: use 2-D look-ups)
};

// The environment between levels k and k+1 at fraction s of the layer in ln p.
struct Segment {
  const Table::Row* mid_row;    // the tables cut at the layer midpoint (or null)
  Quadratic sat, sat_eps;
  double min_sat, min_sat_eps;  // over the whole layer
  double env_mid, env_top;      // environment buoyancy temperature at s = 1/2 and s = 1 (K)
};

// Cuts of the pseudo-adiabat tables at the pressures met so far. A grid's columns share
// their pressure levels (and so the layer midpoints and the analysis top), so after the
// first columns every look-up at a level is a 1-D interpolation along a cut.
class RowCache {
 public:
  const Table::Row* find(double lnp, const Table& table) {
    std::uint64_t key;
    std::memcpy(&key, &lnp, sizeof key);
    std::uint64_t h = key * 0x9E3779B97F4A7C15ull;
    for (std::size_t probe = 0; probe < kSlots; ++probe) {
      const std::size_t slot = ((h >> 40) + probe) & (kSlots - 1);
      if (slots_[slot] < 0) {
        if (rows_.size() >= kMaxRows) return nullptr;  // not a fixed-level grid: 2-D look-ups
        slots_[slot] = static_cast<int>(rows_.size());
        keys_[slot] = key;
        rows_.push_back(std::make_unique<Table::Row>());
        table.cut(lnp, *rows_.back());
        return rows_.back().get();
      }
      if (keys_[slot] == key) return rows_[static_cast<std::size_t>(slots_[slot])].get();
    }
    return nullptr;
  }

 private:
  static constexpr std::size_t kSlots = 1024;
  static constexpr std::size_t kMaxRows = 256;  // about 1.8 MB of cuts per analyzer
  std::vector<int> slots_ = std::vector<int>(kSlots, -1);
  std::vector<std::uint64_t> keys_ = std::vector<std::uint64_t>(kSlots, 0);
  std::vector<std::unique_ptr<Table::Row>> rows_;
};

struct Parcel {
  int level = -1;         // position in levels_
  double theta_w = kNaN;
  double lcl_t = kNaN, lcl_lnp = kNaN;
  int lcl_seg = -1;       // layer holding the LCL (-1: LCL above the analysis top)
  double lcl_s = 0;       // fraction of that layer
  bool flagged = false;
  double excess = kNaN;   // maximum excess, K (NaN until computed / when LCL above top)
  bool excess_done = false;
  double lfc_lnp = kNaN;
};

}  // namespace

void QcCounts::add(const QcCounts& o) {
  columns_analysed += o.columns_analysed;
  columns_skipped += o.columns_skipped;
  humidity_clipped += o.humidity_clipped;
  dew_point_corrected += o.dew_point_corrected;
  temperature_rejected += o.temperature_rejected;
  surface_pressure_rejected += o.surface_pressure_rejected;
}

void ColumnResult::set_missing(int n_levels, bool with_levels) {
  latent_layer_depth_pa = latent_layer_depth_z_m = latent_layer_bottom_pa = latent_layer_top_pa = kNaN;
  tangent_theta_w_k = tangent_pressure_pa = mu_pressure_pa = mu_theta_w_k = kNaN;
  mu_cape_j_kg = mu_cin_j_kg = mu_lfc_pressure_pa = mu_el_pressure_pa = kNaN;
  mu_lift_to_lfc_pa = mu_lift_to_lfc_z_m = easiest_lift_pa = easiest_lift_pressure_pa = kNaN;
  latent_class = kByteMissing;
  if (with_levels) {
    const auto n = static_cast<size_t>(std::max(n_levels, 0));
    for (auto* v : {&levels.wet_bulb_temperature_k, &levels.wet_bulb_potential_temperature_k,
                    &levels.saturation_theta_w_k, &levels.max_parcel_excess_k, &levels.dew_point_k})
      v->assign(n, kNaN);
    for (auto* v : {&levels.latent_flag, &levels.stability_class, &levels.potential_instability})
      v->assign(n, kByteMissing);
  }
}

struct ColumnAnalyzer::Impl {
  AnalysisSettings settings;
  const Table& table = Table::instance();
  const double kLnTableTop = std::log(Table::kPressureMinPa);
  bool virtual_mode;

  RowCache row_cache;
  std::vector<double> cut_lnp;                  // analysis levels of the previous column
  std::vector<const Table::Row*> level_rows, mid_rows;
  std::vector<Level> levels;       // usable levels, bottom up; [0, n_an) form the analysis column
  int n_an = 0;                    // analysis levels (p >= top, plus an interpolated top level)
  std::vector<Segment> segs;       // n_an - 1 layers
  std::vector<double> suffix_eps;  // min of sat_eps over layers k.. top
  std::vector<Parcel> parcels;     // one per level (filled lazily: source layer, or all with level fields)
  struct PressureLayout {
    std::vector<double> p, lnp;  // a pressure array seen, and its ln p
    std::vector<int> order;      // its indices, bottom up
    std::vector<int> rank;       // input index -> position in order
  };
  PressureLayout layouts[2];     // the two most recent arrays
  const PressureLayout* layout = nullptr;  // the current column's (order, ln p, ranks)
  std::vector<int> position_of_input;  // input index -> position in levels (-1 unusable)
  int n_source = 0;
  int n_input = 0;
  std::vector<detail::MuCandidate> candidates;  // flagged source-layer parcels (most_unstable_by_cape)
  std::vector<ParcelAscent> candidate_ascents;  // their ascents, by position

  explicit Impl(const AnalysisSettings& s) : settings(s), virtual_mode(s.buoyancy == BuoyancyMode::virtual_temperature) {
    if (!(s.top_pressure_pa >= Table::kPressureMinPa && s.top_pressure_pa < Table::kPressureMaxPa))
      throw std::invalid_argument("top pressure must lie between 10 and 1150 hPa");
    if (!(s.source_layer_pa >= 0)) throw std::invalid_argument("source layer depth must be >= 0");
    if (!(s.min_excess_k >= 0)) throw std::invalid_argument("min_excess_k must be >= 0");
    if (s.cape_substeps < 1) throw std::invalid_argument("cape_substeps must be >= 1");
  }

  // ------------------------------------------------------------ environment
  // Environment (virtual) temperature used for buoyancy, at fraction s of layer k.
  double env_buoyancy_temp(int k, double s) const {
    const Level& a = levels[k];
    const Level& b = levels[k + 1];
    const double t = a.t + s * (b.t - a.t);
    if (!virtual_mode) return t;
    const double r = a.r + s * (b.r - a.r);
    return thermo::virtual_temperature_k(t, r);
  }
  double lnp_at(int k, double s) const { return levels[k].lnp + s * (levels[k + 1].lnp - levels[k].lnp); }
  double height_at_lnp(double lnp) const {
    // Geopotential height linear in ln p between the analysis levels (METHODS).
    for (int k = 0; k + 1 < n_an; ++k) {
      const Level& a = levels[k];
      const Level& b = levels[k + 1];
      if (lnp <= a.lnp && lnp >= b.lnp) {
        const double s = (a.lnp - lnp) / (a.lnp - b.lnp);
        return a.z + s * (b.z - a.z);
      }
    }
    if (n_an > 0 && lnp == levels[0].lnp) return levels[0].z;
    return kNaN;
  }
  // Saturation theta_w of environment temperature t (and mixing ratio r) at lnp, for buoyancy;
  // *slope gets d(sat)/d(temperature) for the threshold of min_excess_k.
  double saturation_theta_w(double t, double r, double lnp, const Table::Row* row, double* slope) const {
    if (virtual_mode) {
      const double tv = thermo::virtual_temperature_k(t, r);
      return row ? table.theta_w_from_virtual_k(*row, tv, slope) : table.theta_w_from_virtual_k(tv, lnp, slope);
    }
    return row ? table.theta_w_k(*row, t, slope) : table.theta_w_k(t, lnp, slope);
  }

  // ------------------------------------------------------------ parcels
  double parcel_buoyancy_temp(const Parcel& pc, const Table::Curve& curve, double lnp) const {
    if (lnp > pc.lcl_lnp) {  // below the LCL: dry adiabat, source mixing ratio
      const Level& src = levels[pc.level];
      const double t = src.t * std::exp(thermo::poisson_kappa(src.r) * (lnp - src.lnp));
      return virtual_mode ? thermo::virtual_temperature_k(t, src.r) : t;
    }
    return virtual_mode ? curve.virtual_temperature_k(lnp) : curve.temperature_k(lnp);
  }
  // The same at a level or layer midpoint whose table cut may be cached.
  double parcel_buoyancy_temp(const Parcel& pc, const Table::Curve& curve, double lnp,
                              const Table::Row* row) const {
    if (lnp > pc.lcl_lnp || !row) return parcel_buoyancy_temp(pc, curve, lnp);
    return virtual_mode ? curve.virtual_temperature_k(*row) : curve.temperature_k(*row);
  }

  void init_parcel(int k) {
    Parcel& pc = parcels[k];
    pc = Parcel{};
    pc.level = k;
    const Level& lv = levels[k];
    const double td = thermo::dew_point_k(lv.e);
    pc.lcl_t = std::min(thermo::lcl_temperature_k(lv.t, td), lv.t);
    pc.lcl_lnp = std::min(lv.lnp + std::log(pc.lcl_t / lv.t) / thermo::poisson_kappa(lv.r), lv.lnp);
    // An LCL above the tables (10 hPa), or a theta_w beyond them, belongs to stratospheric
    // air far from any tabulated pseudo-adiabat: missing.
    pc.theta_w = pc.lcl_lnp >= kLnTableTop ? in_table_range(table.theta_w_k(pc.lcl_t, pc.lcl_lnp)) : kNaN;
    // The layer of the analysis column that holds the LCL.
    pc.lcl_seg = -1;
    if (k < n_an && pc.lcl_lnp >= levels[n_an - 1].lnp) {
      int j = k;
      while (j + 1 < n_an - 1 && levels[j + 1].lnp > pc.lcl_lnp) ++j;
      if (j + 1 < n_an) {
        pc.lcl_seg = j;
        pc.lcl_s = std::clamp((levels[j].lnp - pc.lcl_lnp) / (levels[j].lnp - levels[j + 1].lnp), 0.0, 1.0);
      }
    }
    if (pc.lcl_seg < 0) {
      pc.excess_done = true;  // LCL above the analysis top: excess missing, not flagged
      return;
    }
    // Fast test against the running minimum of the threshold adiabats; explicit ascent near the threshold.
    const int j = pc.lcl_seg;
    double threshold = segs[j].sat_eps.min_on(pc.lcl_s, 1.0);
    if (j + 1 < static_cast<int>(suffix_eps.size())) threshold = std::min(threshold, suffix_eps[j + 1]);
    if (std::fabs(pc.theta_w - threshold) < kNearThresholdK) {
      compute_excess(pc);
      pc.flagged = pc.excess > settings.min_excess_k;
    } else {
      pc.flagged = pc.theta_w > threshold;
    }
    if (pc.flagged) pc.lfc_lnp = find_lfc(pc);
  }

  // Maximum parcel-minus-environment (virtual) temperature at or above the LCL, below the top.
  void compute_excess(Parcel& pc) const {
    if (pc.excess_done) return;
    pc.excess_done = true;
    pc.excess = walk(pc, false).max_excess;
  }

  struct WalkResult {
    double max_excess = -std::numeric_limits<double>::infinity();
    double positive_area = 0.0;  // integral of positive buoyancy d(ln p) at or above the LCL, K
    double negative_area = 0.0;  // integral of negative buoyancy from the source to the LFC, K (>= 0)
  };

  // Follow the parcel up to the analysis top in pieces (each layer split into cape_substeps,
  // the LCL a node); buoyancy on each piece is the parabola through its ends and midpoint,
  // whose maximum and positive/negative areas are exact. With integrals == false the walk
  // starts at the LCL and gives the maximum excess only.
  WalkResult walk(const Parcel& pc, bool integrals,
                  double stop_lnp = -std::numeric_limits<double>::infinity()) const {
    WalkResult out;
    const auto curve = table.curve(pc.theta_w);
    const int substeps = integrals ? settings.cape_substeps : 1;
    const double x_start = integrals ? levels[pc.level].lnp : pc.lcl_lnp;
    const int k_start = integrals ? pc.level : pc.lcl_seg;
    auto buoyancy = [&](int k, double x) {
      const double s = std::clamp((levels[k].lnp - x) / (levels[k].lnp - levels[k + 1].lnp), 0.0, 1.0);
      return parcel_buoyancy_temp(pc, curve, x) - env_buoyancy_temp(k, s);
    };
    auto piece = [&](int k, double xa, double xb, double& ba) {
      const bool whole_layer = xa == levels[k].lnp && xb == levels[k + 1].lnp;
      const double xm = 0.5 * (xa + xb);
      const double bm = whole_layer ? parcel_buoyancy_temp(pc, curve, xm, segs[k].mid_row) - segs[k].env_mid
                                    : buoyancy(k, xm);
      const double bb = xb == levels[k + 1].lnp
                            ? parcel_buoyancy_temp(pc, curve, xb, levels[k + 1].row) - segs[k].env_top
                            : buoyancy(k, xb);
      const Quadratic q = Quadratic::through(ba, bm, bb);
      const double width = xa - xb;
      const double q_max = q.max_on(0.0, 1.0);
      // A piece of one sign integrates by Simpson's rule, exact for the parabola.
      const double simpson = (ba + 4.0 * bm + bb) / 6.0;
      const bool all_positive = q_max > 0 && q.min_on(0.0, 1.0) >= 0;
      const bool all_negative = q_max <= 0;
      if (xa <= pc.lcl_lnp + 1e-12) {
        out.max_excess = std::max(out.max_excess, q_max);
        if (integrals && !all_negative)
          out.positive_area += width * (all_positive ? simpson : q.signed_area(0.0, 1.0, true));
      }
      if (integrals && xa > pc.lfc_lnp && !all_positive) {
        const bool whole = xb >= pc.lfc_lnp;
        out.negative_area += width * (whole && all_negative ? -simpson
                                                            : q.signed_area(0.0, whole ? 1.0 : (xa - pc.lfc_lnp) / width, false));
      }
      ba = bb;
    };
    double xa = x_start;
    double ba = buoyancy(k_start, xa);
    // Layers are walked whole (the same pieces as the excess walk); the walk ends with the
    // layer that holds stop_lnp.
    for (int k = k_start; k + 1 < n_an && xa > stop_lnp; ++k) {
      const double hi = levels[k].lnp, lo = levels[k + 1].lnp;
      if (xa <= lo) continue;
      const double share = substeps * (xa - lo) / (hi - lo);  // pieces of this layer left, rounded up
      int n = static_cast<int>(share);
      if (n < share - 1e-9) ++n;
      n = std::max(n, 1);
      for (int i = 1; i <= n; ++i) {
        const double xb = i == n ? lo : xa - (xa - lo) / (n - i + 1);
        if (pc.lcl_lnp < xa && pc.lcl_lnp > xb) {  // the LCL is a node of the walk
          piece(k, xa, pc.lcl_lnp, ba);
          xa = pc.lcl_lnp;
        }
        piece(k, xa, xb, ba);
        xa = xb;
      }
    }
    return out;
  }

  // Lowest point at or above the LCL where the parcel is buoyant (theta_w > sat). A saturated
  // source level has zero excess at its own LCL: inside the layer holding the LCL a margin of
  // kThetaTieK (the tables' accuracy) keeps rounding from calling it buoyant there; above
  // that layer the crossing is exact.
  double find_lfc(const Parcel& pc) const {
    double s_start = pc.lcl_s;
    double best_gap = -std::numeric_limits<double>::infinity(), best_lnp = kNaN;
    for (int k = pc.lcl_seg; k + 1 < n_an; ++k, s_start = 0.0) {
      const double theta = k == pc.lcl_seg ? pc.theta_w - kThetaTieK : pc.theta_w;
      const Quadratic& q = segs[k].sat;
      if (q.at(s_start) < theta) return lnp_at(k, s_start);
      if (segs[k].min_sat < theta) {
        double r[2];
        if (q.roots(theta, s_start, 1.0, r) > 0) return lnp_at(k, r[0]);
      }
      const double gap = pc.theta_w - q.min_on(s_start, 1.0);
      if (gap > best_gap) {
        best_gap = gap;
        best_lnp = lnp_at(k, 1.0);
      }
    }
    // Flagged by the explicit excess while the parabola of saturation theta_w stays a hair
    // above the parcel: the closest approach stands for the LFC.
    return best_lnp;
  }

  // Highest downward crossing of buoyancy below the top (the top if still buoyant there).
  double find_el(const Parcel& pc) const {
    const int top = n_an - 1;
    const double theta = pc.theta_w;
    if (levels[top].sat < theta) return levels[top].lnp;
    for (int k = top - 1; k >= pc.lcl_seg; --k) {
      const double s_lo = (k == pc.lcl_seg) ? pc.lcl_s : 0.0;
      const Quadratic& q = segs[k].sat;
      if (q.min_on(s_lo, 1.0) < theta) {
        double r[2];
        const int n = q.roots(theta, s_lo, 1.0, r);
        if (n > 0) return lnp_at(k, r[n - 1]);
        return lnp_at(k, s_lo);
      }
    }
    return pc.lfc_lnp;
  }

  ParcelAscent full_ascent(Parcel& pc) {
    ParcelAscent out{};
    out.source_pressure_pa = levels[pc.level].p;
    out.theta_w_k = pc.theta_w;
    out.lcl_pressure_pa = std::exp(pc.lcl_lnp);
    out.lcl_temp_k = pc.lcl_t;
    out.lfc_pressure_pa = out.el_pressure_pa = out.cin_j_kg = kNaN;
    out.cape_j_kg = 0.0;
    if (!pc.flagged) {
      compute_excess(pc);
      out.max_excess_k = pc.excess;
      out.flagged = false;
      return out;
    }
    // Positive area at or above the LCL is the area from the LFC to the EL: the LFC is the
    // lowest buoyant point above the LCL and nothing above the EL is buoyant, so the walk
    // ends with the layer of the EL (the maximum excess of a flagged parcel lies below it).
    const double el_lnp = find_el(pc);
    const WalkResult w = walk(pc, true, el_lnp);
    if (!pc.excess_done) {
      pc.excess = w.max_excess;
      pc.excess_done = true;
    }
    out.max_excess_k = pc.excess;
    out.flagged = true;
    out.lfc_pressure_pa = std::exp(pc.lfc_lnp);
    out.el_pressure_pa = std::exp(el_lnp);
    out.cape_j_kg = thermo::kRd * w.positive_area;
    out.cin_j_kg = thermo::kRd * w.negative_area;
    return out;
  }

  // The flagged source-layer parcel with the largest CAPE (exact ties: the lowest level), its
  // ascent in *best; -1 when none is flagged. Parcels bounded by another's CAPE are not lifted
  // (detail::choose_most_unstable).
  int most_unstable_by_cape(ParcelAscent& best) {
    candidates.clear();
    for (int k = 0; k < n_source; ++k)
      if (parcels[k].flagged) candidates.push_back({k, parcels[k].theta_w, parcels[k].lcl_lnp});
    if (candidates.empty()) return -1;
    candidate_ascents.resize(static_cast<std::size_t>(n_source));
    const int mu = detail::choose_most_unstable(candidates, [&](int k) {
      candidate_ascents[static_cast<std::size_t>(k)] = full_ascent(parcels[k]);
      return candidate_ascents[static_cast<std::size_t>(k)].cape_j_kg;
    });
    best = candidate_ascents[static_cast<std::size_t>(mu)];
    return mu;
  }

  // ------------------------------------------------------------ the column
  bool load(const ColumnInput& in, QcCounts& qc) {
    n_input = in.n_levels;
    levels.clear();
    const std::size_t n = static_cast<std::size_t>(std::max(0, n_input));
    position_of_input.assign(n, -1);
    const double* p = in.pressure_pa;
    // A grid's columns share their pressure levels: the vertical order and ln p are
    // worked out once for a pressure array and reused while it repeats (two arrays are
    // remembered, so that files mixing both vertical orders also hit).
    PressureLayout* found = nullptr;
    for (PressureLayout& candidate : layouts)
      if (n == candidate.p.size() && (n == 0 || std::memcmp(p, candidate.p.data(), n * sizeof(double)) == 0))
        found = &candidate;
    if (!found) {
      std::swap(layouts[0], layouts[1]);  // the most recent moves to [0]; the older is replaced
      found = &layouts[1];
      found->p.assign(p, p + n);
      found->lnp.resize(n);
      for (std::size_t i = 0; i < n; ++i) found->lnp[i] = p[i] > 0 ? std::log(p[i]) : kNaN;
      found->order.resize(n);
      std::iota(found->order.begin(), found->order.end(), 0);
      bool down = true, up = true;
      for (std::size_t i = 1; i < n; ++i) {
        if (!(p[i] < p[i - 1])) down = false;
        if (!(p[i] > p[i - 1])) up = false;
      }
      if (up)
        std::reverse(found->order.begin(), found->order.end());
      else if (!down)
        std::stable_sort(found->order.begin(), found->order.end(), [&](int a, int b) {
          const double pa = std::isnan(p[a]) ? -1 : p[a], pb = std::isnan(p[b]) ? -1 : p[b];
          return pa > pb;
        });
      found->rank.assign(n, -1);
      for (std::size_t r = 0; r < n; ++r) found->rank[static_cast<std::size_t>(found->order[r])] = static_cast<int>(r);
    }
    layout = found;
    const std::vector<double>& input_lnp = layout->lnp;
    const bool has_surface = in.surface_pressure_pa > 0;  // false for NaN too
    const double top = settings.top_pressure_pa;
    for (int i : layout->order) {
      // Levels above the analysis top enter only the level fields; without them one is
      // enough (to interpolate the top). Quality control counts levels up to the top.
      if (!settings.level_fields && !levels.empty() && levels.back().p < top) break;
      const double pi = p[i], ti = in.temp_k[i], hi = in.humidity[i];
      if (!(pi > 0) || !std::isfinite(pi) || !std::isfinite(ti) || !std::isfinite(hi)) continue;  // missing
      if (has_surface && pi > in.surface_pressure_pa) continue;  // below ground
      if (pi < Table::kPressureMinPa || pi > Table::kPressureMaxPa) continue;
      QcCounts scratch_qc;
      QcCounts& level_qc = pi >= top ? qc : scratch_qc;  // counted only up to the analysis top
      if (ti < kMinValidTempK || ti > kMaxValidTempK) {
        ++level_qc.temperature_rejected;
        continue;
      }
      if (!levels.empty() && pi >= levels.back().p) continue;  // duplicate pressure
      const double es = thermo::saturation_vapour_pressure_pa(ti);
      double e = 0.0;
      switch (in.humidity_kind) {
        case HumidityKind::specific_humidity:
          e = hi > 0 ? thermo::vapour_pressure_from_specific_humidity_pa(hi, pi) : 0.0;
          break;
        case HumidityKind::mixing_ratio:
          e = hi > 0 ? thermo::vapour_pressure_from_mixing_ratio_pa(hi, pi) : 0.0;
          break;
        case HumidityKind::relative_humidity:
          if (hi > 1.0) ++level_qc.humidity_clipped;
          e = std::min(hi, 1.0) * es;
          if (hi > 1.0) e = es;
          break;
        case HumidityKind::dew_point:
          if (hi > ti) ++level_qc.dew_point_corrected;
          // Below 150 K Bolton's formula leaves its range (pole at 29.65 K): the floor below applies.
          e = hi >= kMinValidTempK ? thermo::saturation_vapour_pressure_pa(std::min(hi, ti)) : 0.0;
          break;
      }
      if (in.humidity_kind == HumidityKind::specific_humidity || in.humidity_kind == HumidityKind::mixing_ratio) {
        if (e > es * (1.0 + 1e-9)) ++level_qc.humidity_clipped;  // exactly saturated input is not clipping
        e = std::min(e, es);
      }
      if (e < kMinRelativeHumidity * es) {  // zero or negative humidity
        ++level_qc.humidity_clipped;
        e = kMinRelativeHumidity * es;
      }
      Level lv;
      lv.index = i;
      lv.p = pi;
      lv.lnp = input_lnp[static_cast<std::size_t>(i)];
      lv.t = ti;
      lv.e = e;
      lv.r = thermo::mixing_ratio(e, pi);
      lv.tv = thermo::virtual_temperature_k(ti, lv.r);
      lv.z = in.height_m ? in.height_m[i] : kNaN;
      levels.push_back(lv);
    }
    return static_cast<int>(levels.size()) >= kMinUsableLevels;
  }

  void build_analysis_column() {
    const double top = settings.top_pressure_pa;
    n_an = 0;
    while (n_an < static_cast<int>(levels.size()) && levels[n_an].p >= top) ++n_an;
    if (n_an > 0 && n_an < static_cast<int>(levels.size()) && levels[n_an - 1].p > top) {
      // Interpolate the analysis top between the levels around it (linear in ln p).
      const Level& a = levels[n_an - 1];
      const Level& b = levels[n_an];
      Level lv;
      lv.index = -1;
      lv.p = top;
      lv.lnp = std::log(top);
      const double s = (a.lnp - lv.lnp) / (a.lnp - b.lnp);
      lv.t = a.t + s * (b.t - a.t);
      lv.r = a.r + s * (b.r - a.r);
      lv.e = thermo::vapour_pressure_from_mixing_ratio_pa(lv.r, top);
      lv.tv = thermo::virtual_temperature_k(lv.t, lv.r);
      lv.z = a.z + s * (b.z - a.z);
      levels.insert(levels.begin() + n_an, lv);
      ++n_an;
    }
    for (size_t k = 0; k < levels.size(); ++k)
      if (levels[k].index >= 0) position_of_input[static_cast<size_t>(levels[k].index)] = static_cast<int>(k);
    // Table cuts at the analysis levels and layer midpoints, looked up again only when the
    // column's levels differ from the previous column's.
    const std::size_t n_cut = static_cast<std::size_t>(n_an);
    bool same_levels = n_cut == cut_lnp.size();
    for (std::size_t k = 0; same_levels && k < n_cut; ++k) same_levels = cut_lnp[k] == levels[k].lnp;
    if (!same_levels) {
      cut_lnp.resize(n_cut);
      level_rows.resize(n_cut);
      mid_rows.assign(n_cut > 0 ? n_cut - 1 : 0, nullptr);
      for (std::size_t k = 0; k < n_cut; ++k) {
        cut_lnp[k] = levels[k].lnp;
        level_rows[k] = row_cache.find(levels[k].lnp, table);
        if (k > 0) mid_rows[k - 1] = row_cache.find(0.5 * (levels[k - 1].lnp + levels[k].lnp), table);
      }
    }
    const double eps = settings.min_excess_k;
    for (int k = 0; k < n_an; ++k) {
      Level& lv = levels[k];
      lv.row = level_rows[static_cast<std::size_t>(k)];
      double slope = 0;
      if (virtual_mode) {
        lv.sat = saturation_theta_w(lv.t, lv.r, lv.lnp, lv.row, &slope);
        lv.theta_w_star = settings.level_fields ? theta_w_star_at(lv) : kNaN;  // else on demand (tangent)
      } else {
        lv.theta_w_star = lv.sat = lv.row ? table.theta_w_k(*lv.row, lv.t, &slope) : table.theta_w_k(lv.t, lv.lnp, &slope);
      }
      lv.sat_eps = lv.sat + eps * slope;
    }
    segs.resize(static_cast<size_t>(std::max(n_an - 1, 0)));
    suffix_eps.resize(segs.size());
    for (int k = 0; k + 1 < n_an; ++k) {
      const Level& a = levels[k];
      const Level& b = levels[k + 1];
      double slope = 0;
      Segment& sg = segs[k];
      const double lnp_m = 0.5 * (a.lnp + b.lnp);
      sg.mid_row = mid_rows[static_cast<std::size_t>(k)];
      const double sat_m = saturation_theta_w(0.5 * (a.t + b.t), 0.5 * (a.r + b.r), lnp_m, sg.mid_row, &slope);
      sg.sat = Quadratic::through(a.sat, sat_m, b.sat);
      sg.sat_eps = Quadratic::through(a.sat_eps, sat_m + eps * slope, b.sat_eps);
      sg.min_sat = sg.sat.min_on(0, 1);
      sg.min_sat_eps = sg.sat_eps.min_on(0, 1);
      sg.env_mid = env_buoyancy_temp(k, 0.5);  // the nodes every ascent through the layer meets
      sg.env_top = env_buoyancy_temp(k, 1.0);
    }
    for (int k = static_cast<int>(segs.size()) - 1; k >= 0; --k)
      suffix_eps[k] = std::min(segs[k].min_sat_eps, k + 1 < static_cast<int>(segs.size()) ? suffix_eps[k + 1] : segs[k].min_sat_eps);
    // Source layer: levels within source_layer_pa of the lowest usable level (inclusive).
    n_source = 0;
    const double p_floor = levels[0].p - settings.source_layer_pa;
    while (n_source < n_an && levels[n_source].p >= p_floor - 1e-6 && levels[n_source].index >= 0) ++n_source;
  }

  double theta_w_star_at(const Level& lv) const {
    return lv.row ? table.theta_w_k(*lv.row, lv.t) : table.theta_w_k(lv.t, lv.lnp);
  }

  // In virtual mode theta_w* (from T) is computed only where it can be the minimum: at a level
  // the environment's mixing ratio is at most saturation, so its virtual temperature is at most
  // that of saturated air at its temperature and sat <= theta_w*. Levels whose sat already lies
  // above the smallest theta_w* found cannot hold the tangent point.
  void compute_tangent_candidates() {
    constexpr double kMarginK = 0.01;  // well above the tables' inconsistency (< 0.001 K)
    int first = -1;
    for (int k = 0; k < n_an; ++k)
      if (levels[k].index >= 0 && (first < 0 || levels[k].sat < levels[first].sat)) first = k;
    if (first < 0) return;
    levels[first].theta_w_star = theta_w_star_at(levels[first]);
    double best = levels[first].theta_w_star;
    for (int k = 0; k < n_an; ++k) {
      Level& lv = levels[k];
      if (lv.index < 0 || k == first || lv.sat - kMarginK >= best) continue;
      lv.theta_w_star = theta_w_star_at(lv);
      best = std::min(best, lv.theta_w_star);
    }
  }

  // Pressure (ln p) where the excess crosses min_excess_k between positions a (flagged) and b.
  double boundary_lnp(int flagged, int other) {
    Parcel& pf = parcels[flagged];
    Parcel& po = parcels[other];
    compute_excess(pf);
    compute_excess(po);
    const double eps = settings.min_excess_k;
    if (std::isnan(po.excess) || std::isnan(pf.excess) || pf.excess <= po.excess) return levels[flagged].lnp;
    const double f = std::clamp((eps - po.excess) / (pf.excess - po.excess), 0.0, 1.0);
    return levels[other].lnp + f * (levels[flagged].lnp - levels[other].lnp);
  }

  void analyze(const ColumnInput& in, ColumnResult& res) {
    const bool with_levels = settings.level_fields;
    res.qc = QcCounts{};
    res.set_missing(in.n_levels, with_levels);
    if (!load(in, res.qc)) {
      res.qc.columns_skipped = 1;
      return;
    }
    build_analysis_column();
    if (n_an < kMinUsableLevels) {
      res.qc.columns_skipped = 1;
      return;
    }
    res.qc.columns_analysed = 1;

    // Tangent saturated adiabat: minimum theta_w_star over the levels up to the top (lowest on ties).
    if (virtual_mode && !settings.level_fields) compute_tangent_candidates();
    for (int k = 0; k < n_an; ++k) {
      if (levels[k].index < 0 || std::isnan(levels[k].theta_w_star)) continue;
      if (std::isnan(res.tangent_theta_w_k) || levels[k].theta_w_star < res.tangent_theta_w_k) {
        res.tangent_theta_w_k = levels[k].theta_w_star;
        res.tangent_pressure_pa = levels[k].p;
      }
    }

    // Parcels: every level of the source layer (every level with level fields).
    const int n_parcels = with_levels ? static_cast<int>(levels.size()) : n_source;
    parcels.resize(levels.size());
    for (int k = 0; k < n_parcels; ++k)
      if (levels[k].index >= 0) init_parcel(k);

    // Most-unstable parcel (METHODS): by default the flagged source-layer parcel with the
    // largest CAPE; where none is flagged, or with mu_parcel = max_theta_w, the largest theta_w.
    ParcelAscent a{};
    int mu = settings.mu_parcel == MuParcelRule::max_cape ? most_unstable_by_cape(a) : -1;
    if (mu < 0) {
      for (int k = 0; k < n_source; ++k)  // largest theta_w, lowest on ties
        if (!std::isnan(parcels[k].theta_w) && (mu < 0 || parcels[k].theta_w > parcels[mu].theta_w)) mu = k;
      if (mu >= 0) a = full_ascent(parcels[mu]);
    }
    if (mu >= 0) {
      const Parcel& pc = parcels[mu];
      res.mu_pressure_pa = levels[mu].p;
      res.mu_theta_w_k = pc.theta_w;
      res.mu_cape_j_kg = a.cape_j_kg;
      if (pc.flagged) {
        res.mu_cin_j_kg = a.cin_j_kg;
        res.mu_lfc_pressure_pa = a.lfc_pressure_pa;
        res.mu_el_pressure_pa = a.el_pressure_pa;
        res.mu_lift_to_lfc_pa = std::max(0.0, levels[mu].p - a.lfc_pressure_pa);
        res.mu_lift_to_lfc_z_m = height_at_lnp(pc.lfc_lnp) - levels[mu].z;
        res.latent_class = static_cast<std::int8_t>(a.cape_j_kg > a.cin_j_kg ? LatentClass::real_latent
                                                                              : LatentClass::pseudo_latent);
      } else {
        res.latent_class = static_cast<std::int8_t>(LatentClass::none);
      }
    }

    // Easiest lift over the flagged parcels of the source layer (lowest level on ties).
    for (int k = 0; k < n_source; ++k) {
      const Parcel& pc = parcels[k];
      if (!pc.flagged) continue;
      const double lift = std::max(0.0, levels[k].p - std::exp(pc.lfc_lnp));
      if (std::isnan(res.easiest_lift_pa) || lift < res.easiest_lift_pa) {
        res.easiest_lift_pa = lift;
        res.easiest_lift_pressure_pa = levels[k].p;
      }
    }

    // Latently unstable layers: runs of flagged levels inside the source layer.
    double depth = 0.0, depth_z = 0.0;
    for (int k = 0; k < n_source;) {
      if (!parcels[k].flagged) {
        ++k;
        continue;
      }
      int top = k;
      while (top + 1 < n_source && parcels[top + 1].flagged) ++top;
      const double lnp_bottom = (k == 0) ? levels[0].lnp : boundary_lnp(k, k - 1);
      const double lnp_top = (top + 1 < n_source) ? boundary_lnp(top, top + 1) : levels[top].lnp;
      const double p_bottom = lnp_bottom == levels[k].lnp ? levels[k].p : std::exp(lnp_bottom);
      const double p_top = lnp_top == levels[top].lnp ? levels[top].p : std::exp(lnp_top);
      if (std::isnan(res.latent_layer_bottom_pa)) {
        res.latent_layer_bottom_pa = p_bottom;
        res.latent_layer_top_pa = p_top;
      }
      depth += p_bottom - p_top;
      depth_z += height_at_lnp(lnp_top) - height_at_lnp(lnp_bottom);
      k = top + 1;
    }
    res.latent_layer_depth_pa = depth;
    res.latent_layer_depth_z_m = depth_z;

    if (with_levels) fill_level_fields(res);
  }

  // theta_w beyond the tables' range (stratospheric air, warmer than any tabulated
  // pseudo-adiabat) is reported missing rather than extrapolated.
  static double in_table_range(double theta_w) {
    return theta_w >= Table::kThetaMinK && theta_w <= Table::kThetaMaxK ? theta_w : kNaN;
  }

  void fill_level_fields(ColumnResult& res) {
    LevelFields& lf = res.levels;
    const double kappa_dry = thermo::kKappaDry;
    // A layer exists only between neighbouring input levels (ranks in bottom-up order).
    const std::vector<int>& rank_of_input = layout->rank;
    int prev_real = -1;  // position of the previous real level (bottom up)
    for (int k = 0; k < static_cast<int>(levels.size()); ++k) {
      const Level& lv = levels[k];
      if (lv.index < 0) continue;
      const size_t i = static_cast<size_t>(lv.index);
      Parcel& pc = parcels[k];
      compute_excess(pc);
      lf.dew_point_k[i] = thermo::dew_point_k(lv.e);
      lf.wet_bulb_potential_temperature_k[i] = in_table_range(pc.theta_w);
      const double tw = k < n_an && lv.row ? table.curve(pc.theta_w).temperature_k(*lv.row)
                                           : table.temperature_k(pc.theta_w, lv.lnp);
      lf.wet_bulb_temperature_k[i] = std::isnan(tw) ? kNaN : std::min(lv.t, tw);
      lf.saturation_theta_w_k[i] = in_table_range(k < n_an ? lv.theta_w_star : table.theta_w_k(lv.t, lv.lnp));
      lf.max_parcel_excess_k[i] = pc.excess;
      lf.latent_flag[i] = pc.flagged ? 1 : 0;
      if (prev_real >= 0 && rank_of_input[static_cast<std::size_t>(levels[prev_real].index)] + 1 ==
                                rank_of_input[i]) {
        // Layer from the previous real level (bottom) to this one (top).
        const Level& b = levels[prev_real];
        const size_t ib = static_cast<size_t>(b.index);
        const double t_dry = b.t * std::exp(kappa_dry * (lv.lnp - b.lnp));
        const double theta_b = prev_real < n_an ? b.theta_w_star : table.theta_w_k(b.t, b.lnp);
        const double t_moist = table.temperature_k(theta_b, lv.lnp);
        const double thickness = lv.z - b.z;
        const double band = std::isnan(thickness) ? 0.0 : kNeutralBandKPerM * std::fabs(thickness);
        const double d_dry = lv.t - t_dry, d_moist = lv.t - t_moist;
        const bool near_dry = std::fabs(d_dry) <= band, near_moist = std::fabs(d_moist) <= band;
        StabilityClass c;
        if (near_dry && near_moist)
          c = std::fabs(d_dry) <= std::fabs(d_moist) ? StabilityClass::neutral_dry : StabilityClass::neutral_saturated;
        else if (near_dry)
          c = StabilityClass::neutral_dry;
        else if (near_moist)
          c = StabilityClass::neutral_saturated;
        else if (d_moist > band)
          c = StabilityClass::absolutely_stable;
        else if (d_dry < -band)
          c = StabilityClass::absolutely_unstable;
        else
          c = StabilityClass::conditionally_unstable;
        lf.stability_class[ib] = static_cast<std::int8_t>(c);
        lf.potential_instability[ib] = pc.theta_w < parcels[prev_real].theta_w ? 1 : 0;
      }
      prev_real = k;
    }
  }
};

ColumnAnalyzer::ColumnAnalyzer(const AnalysisSettings& settings) : impl_(new Impl(settings)) {}
ColumnAnalyzer::~ColumnAnalyzer() { delete impl_; }

void ColumnAnalyzer::analyze(const ColumnInput& column, ColumnResult& result) { impl_->analyze(column, result); }

const AnalysisSettings& ColumnAnalyzer::settings() const { return impl_->settings; }

ParcelAscent ColumnAnalyzer::ascent_from_level(int level) const {
  Impl& im = *impl_;
  if (level < 0 || level >= static_cast<int>(im.position_of_input.size()) || im.position_of_input[level] < 0)
    throw std::invalid_argument("ascent_from_level: level is not a usable level of the last column");
  const int k = im.position_of_input[static_cast<size_t>(level)];
  im.parcels.resize(im.levels.size());
  im.init_parcel(k);
  return im.full_ascent(im.parcels[k]);
}

ColumnResult analyze_column(const ColumnInput& column, const AnalysisSettings& settings) {
  ColumnAnalyzer analyzer(settings);
  ColumnResult result;
  analyzer.analyze(column, result);
  return result;
}

}  // namespace latentlift
