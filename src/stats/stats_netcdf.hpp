// Internal to src/stats: NetCDF access of the climatology (no physics, no statistics):
// reading latentlift analyze outputs one time step at a time, and reading/writing STATS.nc
// (accumulator state plus the derived CF statistics). netcdf.h stays in the .cpp.
#pragma once

#include <array>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "latentlift/climatology.hpp"

namespace latentlift::climatology::detail {

/// How an existing STATS.nc is replaced (the end of the "exists" message).
inline const char* const kReplaceHint = "add --update to add the inputs to it, or remove it";

/// The horizontal grid (and optional level dimension) statistics are kept on.
struct Grid {
  std::vector<std::string> dims;    // horizontal dimensions, slowest first
  std::vector<std::size_t> sizes;
  std::size_t points = 0;
  std::string level_dim;            // "" without level fields
  std::size_t levels = 0;
  std::string grid_mapping;         // name of the grid_mapping variable, "" if none
  std::string coordinates;          // auxiliary coordinates ("lat lon"), "" if none
};

/// Settings recorded by the analysis (global attributes "analysis*"), as text.
using Settings = std::map<std::string, std::string>;

/// The [analysis] section of a TOML configuration text as "analysis_<key>" -> value.
Settings settings_from_toml(const std::string& toml);

/// One latentlift analyze output, as scanned.
struct AnalysisInput {
  std::string path;
  Grid grid;
  std::vector<std::int64_t> valid_times;  // seconds since 1970-01-01Z, per time index
  Settings settings;
  std::string surface_pressure_source;    // its global attribute ("" when absent)
};

/// True when the file holds latentlift analyze output fields (latent_class and mu_cape).
bool is_analysis_output(const std::string& path);
/// Grid, valid times and settings of an analyze output; InputError naming file/variable.
AnalysisInput scan_analysis_output(const std::string& path);

/// Buffers of one time step on the grid points ([level][point] for stability).
struct StepBuffers {
  std::array<std::vector<double>, kFieldCount> field;
  std::vector<std::int8_t> latent_class;
  std::vector<std::int8_t> stability;
  TimeStepFields view(std::int64_t valid_time_s) const;
};

/// Reads time steps of one analyze output (fields converted to the units of field_specs()).
class AnalysisReader {
 public:
  AnalysisReader(const AnalysisInput& input, bool with_levels);
  ~AnalysisReader();
  AnalysisReader(const AnalysisReader&) = delete;
  AnalysisReader& operator=(const AnalysisReader&) = delete;
  void read(std::size_t time_index, StepBuffers& out);

 private:
  struct Impl;
  Impl* impl_;
};

/// What STATS.nc records besides the accumulators.
struct StatsMetadata {
  GroupBy group_by = GroupBy::all;
  Grid grid;
  std::vector<std::int64_t> valid_times;  // every time step counted, ascending
  std::vector<std::string> input_files;
  Settings settings;
  std::string history;
  std::string surface_pressure_source;  // weakest of the inputs: input, derived_from_surface_geopotential, none
};

/// True when the file is a latentlift climatology (global attribute latentlift_climatology_format).
bool is_stats_file(const std::string& path);
/// Metadata of an existing STATS.nc (InputError when it is not a latentlift climatology).
StatsMetadata read_stats_metadata(const std::string& path);
/// Its accumulator state (bins must equal field_specs(): InputError otherwise).
Accumulator read_stats_accumulator(const std::string& path, const StatsMetadata& meta);
/// Write STATS.nc to a temporary file beside `path` and put it into place (replacing an existing
/// file only when `replace`, i.e. --update; otherwise a file that appeared meanwhile is a
/// UsageError). Grid coordinates, grid mapping and the level coordinate are copied from
/// `template_path` (an input or the old STATS.nc).
void write_stats(const std::string& path, const StatsMetadata& meta, const Accumulator& acc,
                 const std::string& template_path, bool replace);

}  // namespace latentlift::climatology::detail
