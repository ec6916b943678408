// The run configuration: built-in defaults (documented in config/default.toml), then a
// TOML file (--config), then --set section.key=value overrides. hPa keys become Pa here.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include "latentlift/netcdf_io.hpp"
#include "latentlift/settings.hpp"

namespace latentlift {

struct RunConfig {
  AnalysisSettings analysis;         // [analysis], SI units
  InputAliases aliases;              // [input]: variable names per quantity
  InputConventions conventions;      // [input]: require_surface_pressure, relative_humidity_over, mixed_phase_*
  std::size_t block_columns = 65536; // [run] block_columns: columns read and analysed at a time
  int threads = 0;                   // [run] threads: 0 = all cores (--threads overrides)
  int deflate_level = 1;             // [output] deflate_level: 0 (off) to 9
};

/// Defaults, then the file at config_path (if not empty), then each "section.key=value" override.
/// Unknown keys and bad values throw UsageError naming the key.
RunConfig load_config(const std::string& config_path, const std::vector<std::string>& overrides);

/// The effective configuration as TOML text (recorded in the output's global attributes).
std::string config_to_toml(const RunConfig& config);

}  // namespace latentlift
