// The column kernel against an independent reference: tests/reference/scipy_reference.py
// implements the METHODS definitions with NumPy/SciPy only (pseudo-adiabats by
// scipy.integrate.solve_ivp, rtol 1e-10; a continuous parcel ascent) and writes its
// inputs and results as a line-based text file, which this test reads back.
//
// Columns: invented profiles (seeded, in the script) and real soundings thinned to
// standard pressure levels. Real data:
//   Atmospheric Radiation Measurement (ARM) user facility, Balloon-borne sounding system
//   (SONDEWNPN), sites TWP C3 / SGP C1 / BNF M1 (US DOE ARM; via ARM-DOE/arm-test-data, MIT).
//   WMO GTS TEMP reports of 2008-12-08 12 UTC as archived by ECMWF (originating national
//   services and ECMWF).
// Tolerances: METHODS (fast pseudo-adiabats within 0.02 K of an accurate integration;
// CAPE integration converged to 0.5 %).
#include <fcntl.h>
#include <gtest/gtest.h>
#include <sys/file.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <limits>
#include <map>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "latentlift/column.hpp"
#include "latentlift/pseudoadiabat.hpp"
#include "latentlift/settings.hpp"
#include "latentlift/thermo.hpp"
#include "support/test_support.hpp"

namespace {

using namespace latentlift;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// ---- tolerances (METHODS)
constexpr double kThetaTolK = 0.03;       // theta_w, theta_w_star, Tw: table within 0.02 K + margin
constexpr double kExcessTolK = 0.03;      // maximum parcel excess (difference of two such values)
constexpr double kFlagBandK = 0.03;       // flags may differ this close to min_excess_k
constexpr double kPressureTolPa = 300.0;  // LFC, EL, layer boundaries: a few hPa
constexpr double kCapeRelTol = 0.01;      // CAPE within 1 % ...
constexpr double kCapeAbsTolJKg = 5.0;    // ... or a few J/kg
constexpr double kCinAbsTolJKg = 3.0;     // CIN within a few J/kg (or 2 %)
constexpr double kLclTolK = 0.2;          // Bolton vs Romps LCL temperature (METHODS)

struct LevelRef {
  std::map<std::string, double> values;
  double get(const std::string& key) const {
    auto it = values.find(key);
    return it == values.end() ? kNaN : it->second;
  }
};

struct ModeRef {
  std::map<std::string, double> column;
  std::vector<LevelRef> levels;
  double get(const std::string& key) const {
    auto it = column.find(key);
    return it == column.end() ? kNaN : it->second;
  }
};

struct ColumnRef {
  std::string name, source, kind;
  double surface_pressure_pa = kNaN;
  std::vector<double> p, t, hum, z;
  std::map<std::string, ModeRef> modes;  // "virtual", "temperature"
};

struct LclRow {
  double temp_k, dew_point_k, pressure_pa, rh, romps_t_lcl_k;
};

struct AdiabatRow {
  double theta_w_k, pressure_pa, temp_k;
};

struct Reference {
  bool available = false;
  std::string why_not;
  std::vector<LclRow> lcl;
  std::vector<AdiabatRow> adiabats;
  std::map<std::string, AnalysisSettings> runs;  // run name -> settings of that reference run
  std::vector<ColumnRef> columns;
};

double parse_number(const std::string& token) {
  if (token == "nan") return kNaN;
  return std::stod(token);
}

void read_pairs(std::istringstream& in, std::map<std::string, double>& out) {
  std::string key, value;
  while (in >> key >> value) out[key] = parse_number(value);
}

Reference load_reference() {
  Reference ref;
  const std::string py = latentlift::test::python();
  auto probe = latentlift::test::run_command(py + " -c 'import numpy, scipy.integrate, scipy.special'");
  if (probe.exit_code != 0) {
    ref.why_not = "NumPy/SciPy not importable by " + py + " (install python3-numpy python3-scipy): " +
                  probe.output;
    return ref;
  }
  // ctest runs every test in its own process: the script's output is cached in the build
  // tree and recomputed when the script is newer (the script replaces the file atomically).
  namespace fs = std::filesystem;
  const fs::path dir = fs::path(LATENTLIFT_BUILD_DIR) / "test-scratch" / "scipy-reference";
  fs::create_directories(dir);
  const std::string out = (dir / "reference.txt").string();
  const std::string script = latentlift::test::test_dir() + "/reference/scipy_reference.py";
  {
    // One process computes, the others (ctest -j) wait for it on an advisory lock.
    const std::string lock_path = (dir / "reference.lock").string();
    const int lock_fd = ::open(lock_path.c_str(), O_CREAT | O_RDWR, 0644);
    if (lock_fd >= 0) ::flock(lock_fd, LOCK_EX);
    std::error_code ec;
    const bool fresh = fs::exists(out) && fs::last_write_time(out, ec) >= fs::last_write_time(script, ec);
    std::string failure;
    if (!fresh) {
      const std::string cmd = py + " " + script + " " + latentlift::test::real_data_dir() + " " + out;
      auto run = latentlift::test::run_command(cmd);
      if (run.exit_code != 0) failure = "reference script failed: " + cmd + "\n" + run.output;
    }
    if (lock_fd >= 0) {
      ::flock(lock_fd, LOCK_UN);
      ::close(lock_fd);
    }
    if (!failure.empty()) {
      ref.why_not = failure;
      return ref;
    }
  }
  std::ifstream in(out);
  std::string line;
  ColumnRef* col = nullptr;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::istringstream ls(line);
    std::string tag;
    ls >> tag;
    if (tag == "lcl") {
      LclRow row{};
      std::string a, b, c, d, e;
      ls >> a >> b >> c >> d >> e;
      row = {parse_number(a), parse_number(b), parse_number(c), parse_number(d), parse_number(e)};
      ref.lcl.push_back(row);
    } else if (tag == "settings") {
      std::string run;
      ls >> run;
      std::string key, value;
      AnalysisSettings s;
      s.level_fields = true;
      while (ls >> key >> value) {
        if (key == "buoyancy") s.buoyancy = parse_buoyancy_mode(value.c_str());
        if (key == "top_pressure_pa") s.top_pressure_pa = parse_number(value);
        if (key == "source_layer_pa") s.source_layer_pa = parse_number(value);
        if (key == "min_excess_k") s.min_excess_k = parse_number(value);
      }
      ref.runs[run] = s;
    } else if (tag == "pseudoadiabat") {
      std::string a, b, c;
      ls >> a >> b >> c;
      ref.adiabats.push_back({parse_number(a), parse_number(b), parse_number(c)});
    } else if (tag == "column") {
      ref.columns.emplace_back();
      col = &ref.columns.back();
      int n = 0;
      std::string psfc;
      ls >> col->name >> col->source >> col->kind >> n >> psfc;
      col->surface_pressure_pa = parse_number(psfc);
    } else if (tag == "level" && col) {
      std::string i, p, t, h, z;
      ls >> i >> p >> t >> h >> z;
      col->p.push_back(parse_number(p));
      col->t.push_back(parse_number(t));
      col->hum.push_back(parse_number(h));
      col->z.push_back(parse_number(z));
    } else if (tag == "result" && col) {
      std::string mode;
      ls >> mode;
      read_pairs(ls, col->modes[mode].column);
    } else if (tag == "levelresult" && col) {
      std::string mode;
      int i = 0;
      ls >> mode >> i;
      auto& levels = col->modes[mode].levels;
      if (static_cast<int>(levels.size()) <= i) levels.resize(i + 1);
      read_pairs(ls, levels[i].values);
    }
  }
  ref.available = !ref.columns.empty();
  if (!ref.available) ref.why_not = "reference output " + out + " holds no columns";
  return ref;
}

const Reference& reference() {
  static const Reference ref = load_reference();
  return ref;
}

#define REQUIRE_REFERENCE()                                                  \
  do {                                                                       \
    if (!reference().available) GTEST_SKIP() << reference().why_not;         \
  } while (0)

HumidityKind kind_of(const std::string& kind) {
  if (kind == "specific_humidity") return HumidityKind::specific_humidity;
  if (kind == "relative_humidity") return HumidityKind::relative_humidity;
  if (kind == "dew_point") return HumidityKind::dew_point;
  if (kind == "mixing_ratio") return HumidityKind::mixing_ratio;
  throw std::runtime_error("unknown humidity kind " + kind);
}

AnalysisSettings settings_for(const std::string& run) {
  auto it = reference().runs.find(run);
  if (it != reference().runs.end()) return it->second;
  AnalysisSettings s;
  const std::string& mode = run;
  s.buoyancy = mode == "temperature" ? BuoyancyMode::temperature : BuoyancyMode::virtual_temperature;
  s.level_fields = true;
  return s;  // top 100 hPa, source layer 300 hPa, min excess 0.01 K: as in the script
}

ColumnInput input_of(const ColumnRef& col) {
  ColumnInput in;
  in.n_levels = static_cast<int>(col.p.size());
  in.pressure_pa = col.p.data();
  in.temp_k = col.t.data();
  in.humidity = col.hum.data();
  in.humidity_kind = kind_of(col.kind);
  in.height_m = col.z.data();
  in.surface_pressure_pa = std::isfinite(col.surface_pressure_pa) ? col.surface_pressure_pa : -1.0;
  return in;
}

// Worst disagreement of one quantity over all columns, printed for the record.
struct Worst {
  std::string what;
  double diff = 0.0;
  std::string where;
  int compared = 0;
  explicit Worst(std::string w) : what(std::move(w)) {}
  void add(double d, const std::string& at) {
    ++compared;
    if (std::fabs(d) > std::fabs(diff)) {
      diff = d;
      where = at;
    }
  }
  ~Worst() {
    std::cout << "[reference] " << what << ": " << compared << " compared, worst difference " << diff
              << (where.empty() ? "" : " at " + where) << std::endl;
  }
};

struct Counter {
  std::string what;
  int n = 0;
  explicit Counter(std::string w) : what(std::move(w)) {}
  ~Counter() { std::cout << "[reference] " << what << ": " << n << std::endl; }
};

std::string at(const ColumnRef& col, const std::string& mode, int level = -1) {
  std::ostringstream os;
  os << col.name << " (" << mode << ")";
  if (level >= 0) os << " level " << level << " p=" << col.p[level] / 100.0 << " hPa";
  return os.str();
}

bool both_missing(double a, double b) { return std::isnan(a) && std::isnan(b); }

// ---- tests

TEST(ScipyReference, BoltonLclTemperatureAgreesWithRompsExactLcl) {
  // Romps (2017, J. Atmos. Sci. 74) exact LCL (Lambert W, computed by SciPy in the script):
  // Bolton (1980, eq. 15) within ~0.2 K over ordinary surface conditions (METHODS).
  REQUIRE_REFERENCE();
  ASSERT_FALSE(reference().lcl.empty());
  Worst worst("LCL temperature Bolton - Romps (K)");
  for (const LclRow& row : reference().lcl) {
    const double t_l = thermo::lcl_temperature_k(row.temp_k, row.dew_point_k);
    std::ostringstream where;
    where << "T=" << row.temp_k << " K RH=" << row.rh << " p=" << row.pressure_pa << " Pa";
    worst.add(t_l - row.romps_t_lcl_k, where.str());
    EXPECT_NEAR(t_l, row.romps_t_lcl_k, kLclTolK) << where.str();
  }
}

TEST(ScipyReference, ReferencePseudoadiabatsAgreeWithSolveIvp) {
  // Two accurate integrations of the same ODE (METHODS): the kernel's Dormand-Prince and
  // SciPy's DOP853 at rtol 1e-10 agree to a millikelvin.
  REQUIRE_REFERENCE();
  ASSERT_FALSE(reference().adiabats.empty());
  Worst worst("reference pseudo-adiabat temperature (K)");
  for (const AdiabatRow& row : reference().adiabats) {
    const double t = pseudoadiabat::reference_temperature_k(row.theta_w_k, row.pressure_pa);
    std::ostringstream where;
    where << "theta_w=" << row.theta_w_k << " K p=" << row.pressure_pa << " Pa";
    worst.add(t - row.temp_k, where.str());
    EXPECT_NEAR(t, row.temp_k, 1e-3) << where.str();
  }
}

TEST(ScipyReference, FastPseudoadiabatTablesAgreeWithSolveIvpWithinTwoHundredthsKelvin) {
  // METHODS: the fast path within 0.02 K of an accurate integration, theta_w -40..+40 degC,
  // 1050..100 hPa; both directions (temperature of an adiabat, and the adiabat through a point).
  REQUIRE_REFERENCE();
  const auto& table = pseudoadiabat::Table::instance();
  Worst w_t("table temperature (K)"), w_th("table theta_w (K)");
  for (const AdiabatRow& row : reference().adiabats) {
    std::ostringstream where;
    where << "theta_w=" << row.theta_w_k << " K p=" << row.pressure_pa << " Pa";
    const double lnp = std::log(row.pressure_pa);
    const double t = table.temperature_k(row.theta_w_k, lnp);
    const double th = table.theta_w_k(row.temp_k, lnp);
    w_t.add(t - row.temp_k, where.str());
    w_th.add(th - row.theta_w_k, where.str());
    EXPECT_NEAR(t, row.temp_k, 0.02) << where.str();
    EXPECT_NEAR(th, row.theta_w_k, 0.02) << where.str();
  }
}

TEST(ScipyReference, WetBulbQuantitiesAgreeOnEveryUsableLevel) {
  REQUIRE_REFERENCE();
  Worst w_tw("wet-bulb temperature (K)"), w_thw("theta_w (K)"), w_star("theta_w_star (K)");
  for (const ColumnRef& col : reference().columns) {
    const ModeRef& ref = col.modes.at("virtual");
    ColumnResult res = analyze_column(input_of(col), settings_for("virtual"));
    if (ref.get("skipped") == 1.0) continue;
    for (size_t i = 0; i < col.p.size(); ++i) {
      const LevelRef& lr = ref.levels[i];
      const std::string where = at(col, "virtual", static_cast<int>(i));
      if (std::isnan(lr.get("theta_w"))) {
        EXPECT_TRUE(std::isnan(res.levels.wet_bulb_potential_temperature_k[i])) << where << " should be unusable";
        continue;
      }
      const double tw = res.levels.wet_bulb_temperature_k[i];
      const double thw = res.levels.wet_bulb_potential_temperature_k[i];
      const double star = res.levels.saturation_theta_w_k[i];
      w_tw.add(tw - lr.get("tw"), where);
      w_thw.add(thw - lr.get("theta_w"), where);
      w_star.add(star - lr.get("theta_w_star"), where);
      EXPECT_NEAR(tw, lr.get("tw"), kThetaTolK) << where;
      EXPECT_NEAR(thw, lr.get("theta_w"), kThetaTolK) << where;
      EXPECT_NEAR(star, lr.get("theta_w_star"), kThetaTolK) << where;
    }
  }
}

TEST(ScipyReference, TangentSaturatedAdiabatAgrees) {
  REQUIRE_REFERENCE();
  Worst worst("tangent_theta_w (K)");
  for (const ColumnRef& col : reference().columns) {
   for (const char* run : {"virtual", "alt"}) {  // analysis top 100 and 250 hPa
    if (!col.modes.count(run)) continue;
    const ModeRef& ref = col.modes.at(run);
    if (ref.get("skipped") == 1.0) continue;
    ColumnResult res = analyze_column(input_of(col), settings_for(run));
    const std::string where = at(col, run);
    worst.add(res.tangent_theta_w_k - ref.get("tangent_theta_w_k"), where);
    EXPECT_NEAR(res.tangent_theta_w_k, ref.get("tangent_theta_w_k"), kThetaTolK) << where;
    if (res.tangent_pressure_pa != ref.get("tangent_pressure_pa")) {
      // A different level may win only if its theta_w_star is within the tolerance of the minimum.
      int k = -1;
      for (size_t i = 0; i < col.p.size(); ++i)
        if (col.p[i] == res.tangent_pressure_pa) k = static_cast<int>(i);
      ASSERT_GE(k, 0) << where << ": tangent pressure " << res.tangent_pressure_pa << " is not a level";
      EXPECT_NEAR(ref.levels[k].get("theta_w_star"), ref.get("tangent_theta_w_k"), kThetaTolK)
          << where << ": tangent at " << res.tangent_pressure_pa << " Pa, reference at "
          << ref.get("tangent_pressure_pa") << " Pa";
    }
   }
  }
}

// Top of a parcel ascent: the analysis top, or the highest usable level below it.
double ascent_top_pa(const ColumnRef& col, const ModeRef& ref, const AnalysisSettings& settings) {
  double top = 1e9;
  for (size_t i = 0; i < col.p.size(); ++i)
    if (!std::isnan(ref.levels[i].get("theta_w"))) top = std::min(top, col.p[i]);
  return std::max(top, settings.top_pressure_pa);
}

// Levels whose reference excess lies this close to the threshold may be flagged either way.
bool near_threshold(double excess, const AnalysisSettings& settings) {
  return std::fabs(excess - settings.min_excess_k) <= kFlagBandK;
}

void check_level_excess_and_flags(const std::string& mode) {
  Worst worst("max parcel excess (K), " + mode);
  int flag_mismatch_near_threshold = 0;
  for (const ColumnRef& col : reference().columns) {
    if (!col.modes.count(mode)) continue;
    const ModeRef& ref = col.modes.at(mode);
    if (ref.get("skipped") == 1.0) continue;
    const AnalysisSettings settings = settings_for(mode);
    ColumnResult res = analyze_column(input_of(col), settings);
    for (size_t i = 0; i < col.p.size(); ++i) {
      const LevelRef& lr = ref.levels[i];
      if (std::isnan(lr.get("theta_w"))) continue;
      const std::string where = at(col, mode, static_cast<int>(i));
      const double ex_ref = lr.get("max_excess");
      const double ex = res.levels.max_parcel_excess_k[i];
      if (std::isnan(ex_ref)) {
        EXPECT_TRUE(std::isnan(ex)) << where << ": reference LCL above the top, kernel excess " << ex;
        continue;
      }
      if (std::isnan(ex) && lr.get("p_lcl") - ascent_top_pa(col, ref, settings) < 1.0) {
        // The LCL sits on the top of the ascent (a saturated highest level of a truncated
        // sounding): "at" or "above" the top is decided by rounding; missing is acceptable.
        continue;
      }
      worst.add(ex - ex_ref, where);
      EXPECT_NEAR(ex, ex_ref, kExcessTolK) << where;
      const int flag_ref = static_cast<int>(lr.get("flag"));
      const int flag = res.levels.latent_flag[i];
      if (flag != flag_ref) {
        if (near_threshold(ex_ref, settings)) {
          ++flag_mismatch_near_threshold;
        } else {
          ADD_FAILURE() << where << ": latent flag " << flag << ", reference " << flag_ref
                        << " (reference excess " << ex_ref << " K, kernel " << ex << " K)";
        }
      }
    }
  }
  std::cout << "[reference] flags differing within " << kFlagBandK << " K of the threshold (" << mode
            << "): " << flag_mismatch_near_threshold << std::endl;
}

TEST(ScipyReference, MaximumParcelExcessAndLatentFlagsAgreeInVirtualMode) {
  REQUIRE_REFERENCE();
  check_level_excess_and_flags("virtual");
}

TEST(ScipyReference, MaximumParcelExcessAndLatentFlagsAgreeInTemperatureMode) {
  REQUIRE_REFERENCE();
  check_level_excess_and_flags("temperature");
}

void expect_cape_near(double cape, double cape_ref, const std::string& where, Worst& worst) {
  worst.add(cape - cape_ref, where);
  EXPECT_NEAR(cape, cape_ref, std::max(kCapeAbsTolJKg, kCapeRelTol * cape_ref)) << where << " CAPE";
}

void expect_cin_near(double cin, double cin_ref, const std::string& where, Worst& worst) {
  if (both_missing(cin, cin_ref)) return;
  worst.add(cin - cin_ref, where);
  EXPECT_NEAR(cin, cin_ref, std::max(kCinAbsTolJKg, 0.02 * cin_ref)) << where << " CIN";
}

void expect_pressure_near(double p, double p_ref, const std::string& where, const char* what,
                          Worst& worst) {
  if (both_missing(p, p_ref)) return;
  worst.add(p - p_ref, where);
  EXPECT_NEAR(p, p_ref, kPressureTolPa) << where << " " << what;
}

// A crossing (LFC or EL) agrees when it lies within kPressureTolPa of the reference's, or
// anywhere in the reference's band around it where |buoyancy| <= 0.02 K (the fast-path
// tolerance): there the crossing is ill-conditioned. Returns true if inside the plain tolerance.
bool expect_crossing_near(double p, double p_ref, double band_bottom, double band_top,
                          const std::string& where, const char* what, Worst& worst, int& ill_conditioned) {
  if (both_missing(p, p_ref)) return true;
  worst.add(p - p_ref, where);
  if (std::fabs(p - p_ref) <= kPressureTolPa) return true;
  const bool in_band = p <= band_bottom + kPressureTolPa && p >= band_top - kPressureTolPa;
  EXPECT_TRUE(in_band) << where << " " << what << ": " << p << " Pa, reference " << p_ref
                       << " Pa (|buoyancy| <= 0.02 K from " << band_bottom << " to " << band_top << " Pa)";
  if (in_band) ++ill_conditioned;
  return false;
}

void check_parcels(const std::string& mode) {
  Worst w_cape("parcel CAPE (J/kg), " + mode), w_cin("parcel CIN (J/kg), " + mode);
  Worst w_lfc("parcel LFC (Pa), " + mode), w_el("parcel EL (Pa), " + mode);
  Worst w_lcl("parcel LCL pressure (Pa), " + mode);
  Counter ill("parcel LFC/EL off by more than 3 hPa inside the |buoyancy| <= 0.02 K band, " + mode);
  int& ill_conditioned = ill.n;
  const AnalysisSettings settings = settings_for(mode);
  for (const ColumnRef& col : reference().columns) {
    if (!col.modes.count(mode)) continue;
    const ModeRef& ref = col.modes.at(mode);
    if (ref.get("skipped") == 1.0) continue;
    ColumnAnalyzer analyzer(settings);
    ColumnResult res;
    analyzer.analyze(input_of(col), res);
    double p_lowest = 0.0;
    for (size_t i = 0; i < col.p.size(); ++i)
      if (!std::isnan(ref.levels[i].get("theta_w"))) p_lowest = std::max(p_lowest, col.p[i]);
    for (size_t i = 0; i < col.p.size(); ++i) {
      const LevelRef& lr = ref.levels[i];
      if (std::isnan(lr.get("theta_w")) || col.p[i] < p_lowest - settings.source_layer_pa) continue;
      const std::string where = at(col, mode, static_cast<int>(i));
      const ParcelAscent a = analyzer.ascent_from_level(static_cast<int>(i));
      w_lcl.add(a.lcl_pressure_pa - lr.get("p_lcl"), where);
      EXPECT_NEAR(a.lcl_pressure_pa, lr.get("p_lcl"), 1.0) << where << " LCL pressure";
      const bool flag_ref = lr.get("flag") == 1.0;
      if (a.flagged != flag_ref) continue;  // judged by the flag tests
      if (!flag_ref) {
        EXPECT_EQ(a.cape_j_kg, 0.0) << where;
        EXPECT_TRUE(std::isnan(a.lfc_pressure_pa)) << where;
        continue;
      }
      expect_crossing_near(a.lfc_pressure_pa, lr.get("lfc"), lr.get("lfc_band_bottom"),
                           lr.get("lfc_band_top"), where, "LFC", w_lfc, ill_conditioned);
      expect_crossing_near(a.el_pressure_pa, lr.get("el"), lr.get("el_band_bottom"), lr.get("el_band_top"),
                           where, "EL", w_el, ill_conditioned);
      expect_cape_near(a.cape_j_kg, lr.get("cape"), where, w_cape);
      expect_cin_near(a.cin_j_kg, lr.get("cin"), where, w_cin);
    }
  }
}

TEST(ScipyReference, SourceLayerParcelsAgreeInVirtualMode) {
  REQUIRE_REFERENCE();
  check_parcels("virtual");
}

TEST(ScipyReference, SourceLayerParcelsAgreeInTemperatureMode) {
  REQUIRE_REFERENCE();
  check_parcels("temperature");
}

void check_column_fields(const std::string& mode) {
  Worst w_mu("mu_theta_w (K), " + mode), w_cape("mu_cape (J/kg), " + mode);
  Counter ill("MU LFC/EL off by more than 3 hPa inside the |buoyancy| <= 0.02 K band, " + mode);
  int& ill_conditioned = ill.n;
  Worst w_cin("mu_cin (J/kg), " + mode), w_lfc("mu_lfc_pressure (Pa), " + mode);
  Worst w_el("mu_el_pressure (Pa), " + mode), w_lift("mu_lift_to_lfc (Pa), " + mode);
  Worst w_liftz("mu_lift_to_lfc_z (m), " + mode), w_easy("easiest_lift (Pa), " + mode);
  Worst w_depth("latent_layer_depth (Pa), " + mode), w_bottom("latent_layer_bottom (Pa), " + mode);
  Worst w_top("latent_layer_top (Pa), " + mode), w_depthz("latent_layer_depth_z (m), " + mode);
  const AnalysisSettings settings = settings_for(mode);
  for (const ColumnRef& col : reference().columns) {
    if (!col.modes.count(mode)) continue;
    const ModeRef& ref = col.modes.at(mode);
    if (ref.get("skipped") == 1.0) continue;
    ColumnResult res = analyze_column(input_of(col), settings);
    const std::string where = at(col, mode);
    if (res.mu_pressure_pa != ref.get("mu_pressure_pa")) {
      // MU rule (METHODS): the flagged source parcel with the largest CAPE, else the largest
      // theta_w. Another source level may win only when, in the reference, it ties with the
      // reference's choice within the tolerance of what decides: CAPE (both flagged) or
      // theta_w (neither flagged), or when its flag or the chosen one's is a near-threshold call.
      const auto it = std::find(col.p.begin(), col.p.end(), res.mu_pressure_pa);
      ASSERT_NE(it, col.p.end()) << where << ": MU source is not a level";
      const LevelRef& there = ref.levels[it - col.p.begin()];
      const int k_ref = static_cast<int>(std::find(col.p.begin(), col.p.end(), ref.get("mu_pressure_pa")) -
                                         col.p.begin());
      const LevelRef& chosen = ref.levels[k_ref];
      const bool flag_there = there.get("flag") == 1.0, flag_chosen = chosen.get("flag") == 1.0;
      const double cape_ref = ref.get("mu_cape_j_kg");
      const bool tie = flag_there && flag_chosen
                           ? std::fabs(there.get("cape") - cape_ref) <=
                                 2.0 * std::max(kCapeAbsTolJKg, kCapeRelTol * cape_ref)
                           : (!flag_there && !flag_chosen &&
                              std::fabs(there.get("theta_w") - ref.get("mu_theta_w_k")) <= kThetaTolK);
      if (tie || near_threshold(there.get("max_excess"), settings) ||
          near_threshold(chosen.get("max_excess"), settings))
        continue;
      ADD_FAILURE() << where << ": MU source " << res.mu_pressure_pa << " Pa (CAPE " << res.mu_cape_j_kg
                    << "), reference " << ref.get("mu_pressure_pa") << " Pa (CAPE " << cape_ref
                    << "; reference CAPE of the kernel's choice " << there.get("cape") << ")";
      continue;
    }
    w_mu.add(res.mu_theta_w_k - ref.get("mu_theta_w_k"), where);
    EXPECT_NEAR(res.mu_theta_w_k, ref.get("mu_theta_w_k"), kThetaTolK) << where;
    const int k_mu = static_cast<int>(std::find(col.p.begin(), col.p.end(), ref.get("mu_pressure_pa")) -
                                      col.p.begin());
    const double mu_excess = ref.levels[k_mu].get("max_excess");
    if (near_threshold(mu_excess, settings) && res.latent_class != static_cast<int>(ref.get("latent_class"))) continue;
    EXPECT_EQ(static_cast<int>(res.latent_class), static_cast<int>(ref.get("latent_class"))) << where;
    expect_cape_near(res.mu_cape_j_kg, ref.get("mu_cape_j_kg"), where, w_cape);
    expect_cin_near(res.mu_cin_j_kg, ref.get("mu_cin_j_kg"), where, w_cin);
    const bool lfc_sharp = expect_crossing_near(
        res.mu_lfc_pressure_pa, ref.get("mu_lfc_pressure_pa"), ref.get("mu_lfc_band_bottom"),
        ref.get("mu_lfc_band_top"), where, "MU LFC", w_lfc, ill_conditioned);
    expect_crossing_near(res.mu_el_pressure_pa, ref.get("mu_el_pressure_pa"), ref.get("mu_el_band_bottom"),
                         ref.get("mu_el_band_top"), where, "MU EL", w_el, ill_conditioned);
    if (lfc_sharp) {  // the lift follows the LFC
      expect_pressure_near(res.mu_lift_to_lfc_pa, ref.get("mu_lift_to_lfc_pa"), where, "MU lift", w_lift);
      if (!both_missing(res.mu_lift_to_lfc_z_m, ref.get("mu_lift_to_lfc_z_m"))) {
        w_liftz.add(res.mu_lift_to_lfc_z_m - ref.get("mu_lift_to_lfc_z_m"), where);
        EXPECT_NEAR(res.mu_lift_to_lfc_z_m, ref.get("mu_lift_to_lfc_z_m"), 30.0) << where << " MU lift z";
      }
    }
    // Easiest lift: within the range the LFC bands of the flagged parcels allow.
    if (!both_missing(res.easiest_lift_pa, ref.get("easiest_lift_pa"))) {
      w_easy.add(res.easiest_lift_pa - ref.get("easiest_lift_pa"), where);
      EXPECT_GE(res.easiest_lift_pa, ref.get("easiest_lift_lo_pa") - kPressureTolPa) << where << " easiest lift";
      EXPECT_LE(res.easiest_lift_pa, ref.get("easiest_lift_hi_pa") + kPressureTolPa) << where << " easiest lift";
    }
    if (!both_missing(res.easiest_lift_pressure_pa, ref.get("easiest_lift_pressure_pa")) &&
        res.easiest_lift_pressure_pa != ref.get("easiest_lift_pressure_pa")) {
      // METHODS names no tie rule: another source is fine if its reference lift can tie with the least.
      const auto it = std::find(col.p.begin(), col.p.end(), res.easiest_lift_pressure_pa);
      ASSERT_NE(it, col.p.end()) << where << ": easiest-lift source is not a level";
      const LevelRef& there = ref.levels[it - col.p.begin()];
      const double lift_lo = res.easiest_lift_pressure_pa - there.get("lfc_band_bottom");
      EXPECT_LE(lift_lo, ref.get("easiest_lift_hi_pa") + kPressureTolPa)
          << where << ": easiest-lift source " << res.easiest_lift_pressure_pa << " Pa, reference "
          << ref.get("easiest_lift_pressure_pa") << " Pa";
    }
    expect_pressure_near(res.latent_layer_depth_pa, ref.get("latent_layer_depth_pa"), where,
                         "latent layer depth", w_depth);
    if (!both_missing(res.latent_layer_depth_z_m, ref.get("latent_layer_depth_z_m"))) {
      w_depthz.add(res.latent_layer_depth_z_m - ref.get("latent_layer_depth_z_m"), where);
      EXPECT_NEAR(res.latent_layer_depth_z_m, ref.get("latent_layer_depth_z_m"), 30.0)
          << where << " latent layer depth z";
    }
    expect_pressure_near(res.latent_layer_bottom_pa, ref.get("latent_layer_bottom_pa"), where,
                         "latent layer bottom", w_bottom);
    expect_pressure_near(res.latent_layer_top_pa, ref.get("latent_layer_top_pa"), where,
                         "latent layer top", w_top);
  }
}

TEST(ScipyReference, ColumnFieldsAgreeInVirtualMode) {
  REQUIRE_REFERENCE();
  check_column_fields("virtual");
}

TEST(ScipyReference, ColumnFieldsAgreeInTemperatureMode) {
  REQUIRE_REFERENCE();
  check_column_fields("temperature");
}

TEST(ScipyReference, MaximumParcelExcessAndLatentFlagsAgreeWithOtherSettings) {
  // Top 250 hPa, source layer 150 hPa, min_excess_k 0.3 K (run "alt" of the script).
  REQUIRE_REFERENCE();
  check_level_excess_and_flags("alt");
}

TEST(ScipyReference, SourceLayerParcelsAgreeWithOtherSettings) {
  REQUIRE_REFERENCE();
  check_parcels("alt");
}

TEST(ScipyReference, ColumnFieldsAgreeWithOtherSettings) {
  REQUIRE_REFERENCE();
  check_column_fields("alt");
}

TEST(ScipyReference, StaticStabilityClassesAgree) {
  // Graphical method of METHODS (dry adiabat and pseudo-adiabat from the bottom of each layer,
  // neutral bands of 0.1 K/km); a class may differ only where the environment lies within the
  // pseudo-adiabat tolerance of a decision boundary.
  REQUIRE_REFERENCE();
  int compared = 0, near_boundary = 0;
  for (const ColumnRef& col : reference().columns) {
    const ModeRef& ref = col.modes.at("virtual");
    if (ref.get("skipped") == 1.0) continue;
    const ColumnResult res = analyze_column(input_of(col), settings_for("virtual"));
    for (size_t i = 0; i < col.p.size(); ++i) {
      const LevelRef& lr = ref.levels[i];
      const std::string where = at(col, "virtual", static_cast<int>(i));
      const int cls = res.levels.stability_class[i];
      if (std::isnan(lr.get("stability"))) {
        EXPECT_EQ(cls, kByteMissing) << where << ": no layer above (or a level unusable)";
        continue;
      }
      ++compared;
      if (cls != static_cast<int>(lr.get("stability"))) {
        if (lr.get("stability_margin") < kThetaTolK) {
          ++near_boundary;
          continue;
        }
        ADD_FAILURE() << where << ": stability class " << cls << ", reference " << lr.get("stability")
                      << " (margin " << lr.get("stability_margin") << " K)";
      }
    }
  }
  std::cout << "[reference] stability classes: " << compared << " compared, " << near_boundary
            << " differing within " << kThetaTolK << " K of a boundary" << std::endl;
  EXPECT_GT(compared, 0);
}

TEST(ScipyReference, PotentialInstabilityAgrees) {
  // theta_w decreasing upward across the layer (METHODS).
  REQUIRE_REFERENCE();
  int compared = 0;
  for (const ColumnRef& col : reference().columns) {
    const ModeRef& ref = col.modes.at("virtual");
    if (ref.get("skipped") == 1.0) continue;
    const ColumnResult res = analyze_column(input_of(col), settings_for("virtual"));
    for (size_t i = 0; i < col.p.size(); ++i) {
      const LevelRef& lr = ref.levels[i];
      const std::string where = at(col, "virtual", static_cast<int>(i));
      const int pot = res.levels.potential_instability[i];
      if (std::isnan(lr.get("potential"))) {
        EXPECT_EQ(pot, kByteMissing) << where;
        continue;
      }
      ++compared;
      EXPECT_EQ(pot, static_cast<int>(lr.get("potential"))) << where;
    }
  }
  EXPECT_GT(compared, 0);
}

TEST(ScipyReference, QualityControlCountsAgree) {
  // Injected faults (random columns) and clipped RH (invented cloudy column): a temperature
  // outside 150-350 K, a dew point above the temperature, humidity above saturation.
  REQUIRE_REFERENCE();
  long rejected = 0, clipped = 0, corrected = 0;
  for (const ColumnRef& col : reference().columns) {
    const ModeRef& ref = col.modes.at("virtual");
    if (ref.get("skipped") == 1.0) continue;
    const ColumnResult res = analyze_column(input_of(col), settings_for("virtual"));
    EXPECT_EQ(res.qc.temperature_rejected, ref.get("qc_temperature_rejected")) << col.name;
    // Levels given exactly at saturation may or may not count as clipped (rounding).
    EXPECT_GE(res.qc.humidity_clipped, ref.get("qc_humidity_clipped")) << col.name;
    EXPECT_LE(res.qc.humidity_clipped, ref.get("qc_humidity_clipped") + ref.get("qc_humidity_at_saturation"))
        << col.name;
    EXPECT_EQ(res.qc.dew_point_corrected, ref.get("qc_dew_point_corrected")) << col.name;
    rejected += res.qc.temperature_rejected;
    clipped += res.qc.humidity_clipped;
    corrected += res.qc.dew_point_corrected;
  }
  std::cout << "[reference] QC counts over all columns: temperature rejected " << rejected
            << ", humidity clipped " << clipped << ", dew point corrected " << corrected << std::endl;
  EXPECT_GT(rejected, 0);
  EXPECT_GT(clipped, 0);
  EXPECT_GT(corrected, 0);
}

TEST(ScipyReference, TopDownLevelOrderGivesTheSameResults) {
  // ColumnInput accepts either vertical order (column.hpp): the reference columns reversed.
  REQUIRE_REFERENCE();
  int compared = 0;
  for (const ColumnRef& col : reference().columns) {
    ColumnRef rev = col;
    std::reverse(rev.p.begin(), rev.p.end());
    std::reverse(rev.t.begin(), rev.t.end());
    std::reverse(rev.hum.begin(), rev.hum.end());
    std::reverse(rev.z.begin(), rev.z.end());
    for (const char* run : {"virtual", "temperature"}) {
      const ColumnResult a = analyze_column(input_of(col), settings_for(run));
      const ColumnResult b = analyze_column(input_of(rev), settings_for(run));
      const std::string where = at(col, run);
      auto same = [&](double x, double y, const char* what) {
        if (both_missing(x, y)) return;
        EXPECT_NEAR(x, y, 1e-6 * std::max(1.0, std::fabs(x))) << where << " " << what;
      };
      same(a.tangent_theta_w_k, b.tangent_theta_w_k, "tangent_theta_w");
      same(a.tangent_pressure_pa, b.tangent_pressure_pa, "tangent_pressure");
      same(a.mu_pressure_pa, b.mu_pressure_pa, "mu_pressure");
      same(a.mu_cape_j_kg, b.mu_cape_j_kg, "mu_cape");
      same(a.mu_cin_j_kg, b.mu_cin_j_kg, "mu_cin");
      same(a.mu_lfc_pressure_pa, b.mu_lfc_pressure_pa, "mu_lfc");
      same(a.mu_el_pressure_pa, b.mu_el_pressure_pa, "mu_el");
      same(a.mu_lift_to_lfc_z_m, b.mu_lift_to_lfc_z_m, "mu_lift_to_lfc_z");
      same(a.easiest_lift_pa, b.easiest_lift_pa, "easiest_lift");
      same(a.latent_layer_depth_pa, b.latent_layer_depth_pa, "latent_layer_depth");
      same(a.latent_layer_depth_z_m, b.latent_layer_depth_z_m, "latent_layer_depth_z");
      EXPECT_EQ(a.latent_class, b.latent_class) << where;
      const size_t n = col.p.size();
      for (size_t i = 0; i < n; ++i) {
        same(a.levels.max_parcel_excess_k[i], b.levels.max_parcel_excess_k[n - 1 - i], "max_parcel_excess");
        EXPECT_EQ(a.levels.latent_flag[i], b.levels.latent_flag[n - 1 - i]) << where << " level " << i;
      }
      ++compared;
    }
  }
  EXPECT_GT(compared, 0);
}

TEST(ScipyReference, IncompleteArmSoundingsAreSkippedWithMissingValues) {
  // ARM SOURCE.md: 20060119.050300, 20060119.163300, 20060120.170800 (T and Td missing above the
  // first record) and 20060120.043800 (Td missing) are incomplete.
  REQUIRE_REFERENCE();
  const char* incomplete[] = {"20060119.050300", "20060119.163300", "20060120.170800", "20060120.043800"};
  int found = 0;
  for (const ColumnRef& col : reference().columns) {
    if (col.source != "arm") continue;
    bool bad = false;
    for (const char* stamp : incomplete) bad = bad || col.name.find(stamp) != std::string::npos;
    if (!bad) continue;
    ++found;
    EXPECT_EQ(col.modes.at("virtual").get("skipped"), 1.0) << col.name << ": reference should skip it";
    ColumnResult res;
    ASSERT_NO_THROW(res = analyze_column(input_of(col), settings_for("virtual"))) << col.name;
    EXPECT_EQ(res.qc.columns_skipped, 1) << col.name;
    EXPECT_EQ(res.qc.columns_analysed, 0) << col.name;
    EXPECT_TRUE(std::isnan(res.tangent_theta_w_k)) << col.name;
    EXPECT_TRUE(std::isnan(res.mu_pressure_pa)) << col.name;
    EXPECT_TRUE(std::isnan(res.mu_cape_j_kg)) << col.name;
    EXPECT_TRUE(std::isnan(res.latent_layer_depth_pa)) << col.name;
    EXPECT_EQ(res.latent_class, kByteMissing) << col.name;
  }
  if (found == 0) GTEST_SKIP() << "ARM soundings not found under " << latentlift::test::real_data_dir();
  EXPECT_EQ(found, 4);
}

TEST(ScipyReference, CompleteRealSoundingsAreAnalysed) {
  REQUIRE_REFERENCE();
  int complete = 0;
  for (const ColumnRef& col : reference().columns) {
    if ((col.source != "arm" && col.source != "ecmwf_temp") || col.modes.at("virtual").get("skipped") == 1.0) continue;
    ++complete;
    ColumnResult res = analyze_column(input_of(col), settings_for("virtual"));
    EXPECT_EQ(res.qc.columns_analysed, 1) << col.name;
    EXPECT_EQ(res.qc.columns_skipped, 0) << col.name;
    EXPECT_TRUE(std::isfinite(res.tangent_theta_w_k)) << col.name;
  }
  if (complete == 0) GTEST_SKIP() << "no real soundings under " << latentlift::test::real_data_dir();
  std::cout << "[reference] complete real soundings analysed: " << complete << std::endl;
}

}  // namespace
