// Analysis settings: the [analysis] section of the configuration, in SI units.
#pragma once

namespace latentlift {

/// How buoyancy is measured: virtual temperatures (Doswell and Rasmussen 1994) or temperatures.
enum class BuoyancyMode { virtual_temperature, temperature };

/// Settings of the column analysis (config keys in hPa are converted to Pa at the edge).
struct AnalysisSettings {
  BuoyancyMode buoyancy = BuoyancyMode::virtual_temperature;  // analysis.buoyancy
  double top_pressure_pa = 10000.0;   // analysis.top_pressure_hpa = 100
  double source_layer_pa = 30000.0;   // analysis.source_layer_hpa = 300
  double min_excess_k = 0.01;         // analysis.min_excess_k
  bool level_fields = false;          // --level-fields: also fill ColumnResult::levels
  int cape_substeps = 1;              // parabolic pieces per layer for the CAPE/CIN integrals
};

/// "virtual" / "temperature" as written in the config; throws std::invalid_argument otherwise.
BuoyancyMode parse_buoyancy_mode(const char* text);
const char* to_string(BuoyancyMode mode);

}  // namespace latentlift
