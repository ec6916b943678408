// The column analysis: one column's profile in, Normand latent-instability
// diagnostics out. Pure C++: no I/O, no global state but the immutable
// pseudo-adiabat table. SI units inside (Pa, K, kg/kg, m, J/kg).
// Definitions: METHODS section of the README (Normand 1938; Bolton 1980).
#pragma once

#include <cstdint>
#include <vector>

#include "latentlift/settings.hpp"

namespace latentlift {

/// Which humidity quantity a column carries (all in SI: kg/kg, fraction 0-1, K).
enum class HumidityKind { specific_humidity, relative_humidity, dew_point, mixing_ratio };

/// One column. Arrays have n_levels entries, in either vertical order; NaN marks missing.
struct ColumnInput {
  int n_levels = 0;
  const double* pressure_pa = nullptr;  // level pressures, Pa
  const double* temp_k = nullptr;       // air temperature, K
  const double* humidity = nullptr;     // see humidity_kind
  HumidityKind humidity_kind = HumidityKind::specific_humidity;
  const double* height_m = nullptr;     // geopotential height, m (may be null: heights missing)
  double surface_pressure_pa = -1.0;    // optional; <= 0 or NaN: not given
};

/// Quality-control counts of one column (METHODS "Quality control"); summed over a grid.
struct QcCounts {
  long columns_analysed = 0;
  long columns_skipped = 0;           // fewer than 3 usable levels
  long humidity_clipped = 0;          // RH > 100 %, q or r above saturation, negative humidity
  long dew_point_corrected = 0;       // dew point above temperature set to temperature
  long temperature_rejected = 0;      // temperature outside 150-350 K (level made unusable)
  long surface_pressure_rejected = 0; // columns skipped: surface pressure missing or outside 300-1100 hPa (set by io)
  void add(const QcCounts& other);
};

/// Missing value for byte fields.
constexpr std::int8_t kByteMissing = -1;

/// Normand's classes of the most-unstable parcel.
enum class LatentClass : std::int8_t { none = 0, pseudo_latent = 1, real_latent = 2 };

/// Static stability class of the layer from a level to the next above (graphical method).
enum class StabilityClass : std::int8_t {
  absolutely_stable = 0, conditionally_unstable = 1, absolutely_unstable = 2,
  neutral_saturated = 3, neutral_dry = 4
};

/// Per-level fields, indexed like the input levels (NaN / kByteMissing where unusable).
struct LevelFields {
  std::vector<double> wet_bulb_temperature_k;
  std::vector<double> wet_bulb_potential_temperature_k;  // theta_w
  std::vector<double> saturation_theta_w_k;               // theta_w_star
  std::vector<double> max_parcel_excess_k;
  std::vector<double> dew_point_k;                        // after QC (for the column report)
  std::vector<std::int8_t> latent_flag;                   // 0/1
  std::vector<std::int8_t> stability_class;               // StabilityClass
  std::vector<std::int8_t> potential_instability;         // 0/1
};

/// Everything the analysis reports for one column (DESIGN output table); NaN = missing.
/// Pressures are in Pa here; the writer converts to hPa at the edge.
struct ColumnResult {
  double latent_layer_depth_pa;
  double latent_layer_depth_z_m;
  double latent_layer_bottom_pa;
  double latent_layer_top_pa;
  double tangent_theta_w_k;
  double tangent_pressure_pa;
  double mu_pressure_pa;
  double mu_theta_w_k;
  double mu_cape_j_kg;
  double mu_cin_j_kg;
  double mu_lfc_pressure_pa;
  double mu_el_pressure_pa;
  double mu_lift_to_lfc_pa;
  double mu_lift_to_lfc_z_m;
  double easiest_lift_pa;
  double easiest_lift_pressure_pa;
  std::int8_t latent_class;           // LatentClass or kByteMissing
  QcCounts qc;
  LevelFields levels;                 // filled only with AnalysisSettings::level_fields
  void set_missing(int n_levels, bool with_levels);
};

/// One parcel's ascent (for the column report, tests and the CAPE/CIN of the MU parcel).
struct ParcelAscent {
  double source_pressure_pa, theta_w_k, lcl_pressure_pa, lcl_temp_k;
  double max_excess_k;     // NaN when the LCL lies above the analysis top
  bool flagged;            // max_excess_k > min_excess_k
  double lfc_pressure_pa, el_pressure_pa, cape_j_kg, cin_j_kg;  // NaN / 0 when not flagged
};

/// Analyses columns; holds scratch space, so use one per thread. Settings are fixed at construction.
class ColumnAnalyzer {
 public:
  explicit ColumnAnalyzer(const AnalysisSettings& settings);
  ~ColumnAnalyzer();
  ColumnAnalyzer(const ColumnAnalyzer&) = delete;
  ColumnAnalyzer& operator=(const ColumnAnalyzer&) = delete;

  /// Analyse one column into result (fully overwritten).
  void analyze(const ColumnInput& column, ColumnResult& result);

  /// Full ascent of the parcel from input level `level` of the last analysed column.
  ParcelAscent ascent_from_level(int level) const;

  const AnalysisSettings& settings() const;

 private:
  struct Impl;
  Impl* impl_;
};

/// Convenience: analyse one column with fresh scratch space.
ColumnResult analyze_column(const ColumnInput& column, const AnalysisSettings& settings);

}  // namespace latentlift
