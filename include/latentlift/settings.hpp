// Analysis settings: the [analysis] section of the configuration, in SI units.
#pragma once

namespace latentlift {

/// How buoyancy is measured: virtual temperatures (Doswell and Rasmussen 1994) or temperatures.
enum class BuoyancyMode { virtual_temperature, temperature };

/// How the most-unstable parcel of the source layer is chosen (METHODS "Parcels, free convection").
/// max_cape: the flagged parcel with the largest CAPE (ties: lowest level; none flagged: largest
/// theta_w); max_theta_w: the largest theta_w in every column (ties: lowest level).
enum class MuParcelRule { max_cape, max_theta_w };

/// Settings of the column analysis (config keys in hPa are converted to Pa at the edge).
struct AnalysisSettings {
  BuoyancyMode buoyancy = BuoyancyMode::virtual_temperature;  // analysis.buoyancy
  double top_pressure_pa = 10000.0;   // analysis.top_pressure_hpa = 100
  double source_layer_pa = 30000.0;   // analysis.source_layer_hpa = 300
  double min_excess_k = 0.01;         // analysis.min_excess_k
  MuParcelRule mu_parcel = MuParcelRule::max_cape;  // analysis.mu_parcel = "max_cape" | "max_theta_w"
  bool level_fields = false;          // --level-fields: also fill ColumnResult::levels
  int cape_substeps = 1;              // parabolic pieces per layer for the CAPE/CIN integrals
};

/// "virtual" / "temperature" as written in the config; throws std::invalid_argument otherwise.
BuoyancyMode parse_buoyancy_mode(const char* text);
const char* to_string(BuoyancyMode mode);

/// "max_cape" / "max_theta_w" as written in the config; throws std::invalid_argument otherwise.
MuParcelRule parse_mu_parcel_rule(const char* text);
const char* to_string(MuParcelRule rule);

}  // namespace latentlift
