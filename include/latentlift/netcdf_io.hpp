// NetCDF input and output (no physics). The reader finds quantities by CF
// standard_name then aliases, converts units with UDUNITS-2 to SI, unpacks and masks,
// and hands out blocks of columns; the writer writes CF-1.8 NetCDF-4 through a
// temporary file renamed into place on commit(). netCDF-C stays behind PIMPL.
#pragma once

#include <cstddef>
#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "latentlift/column.hpp"
#include "latentlift/crs.hpp"
#include "latentlift/grid.hpp"
#include "latentlift/thermo.hpp"

namespace latentlift {

/// Variable names to try, per quantity, after the CF standard_name. Keys: air_temperature,
/// specific_humidity, relative_humidity, dew_point_temperature, humidity_mixing_ratio,
/// geopotential, geopotential_height, surface_air_pressure, surface_altitude, surface_geopotential.
using InputAliases = std::map<std::string, std::vector<std::string>>;

/// Conventions of the input beyond variable names (config section [input]).
struct InputConventions {
  bool require_surface_pressure = false;  // no surface pressure nor surface height: InputError
  thermo::SaturationReference relative_humidity_over = thermo::SaturationReference::water;
  thermo::MixedPhase mixed_phase;         // thresholds of relative_humidity_over = mixed
  /// Quantities whose aliases the user gave (config or --set): a name listed there settles
  /// two variables with the same standard_name (otherwise an InputError listing both).
  std::vector<std::string> chosen_quantities;
};

/// Where the surface pressure of the columns comes from (global attribute surface_pressure_source).
enum class SurfacePressureSource { input, derived_from_surface_geopotential, none };
const char* to_string(SurfacePressureSource source);

/// One block of columns in SI units, [column][level] (levels in the input's order), NaN = missing.
struct ColumnBlock {
  ColumnRange range;
  int n_levels = 0;
  HumidityKind humidity_kind = HumidityKind::specific_humidity;
  std::vector<double> temp_k;               // K
  std::vector<double> humidity;             // kg/kg, fraction 0-1, or K (dew point)
  std::vector<double> height_m;             // geopotential height, m
  std::vector<double> surface_pressure_pa;  // per column, Pa; empty without surface pressure
  bool any_temp = false, any_humidity = false, any_height = false;  // any value not missing
};

/// True when the file holds GRIB (edition 1 or 2), recognised by content, not by its name.
bool is_grib_input(const std::string& path);

/// Which variable of which file supplies a quantity.
struct QuantitySource {
  std::string quantity;  // CF standard_name of the quantity found
  std::string variable;
  std::string file;
  std::string units;     // as in the file
};

/// Storage type of a variable held in memory (as a NetCDF file would store it).
enum class StoredType { int8, uint8, int16, uint16, int32, uint32, int64, uint64, float32, float64, text };

/// One variable of a MemoryDataset: values as stored (packed integers, fill values, time offsets)
/// with the attributes that describe them (units, standard_name, scale_factor, _FillValue ...).
struct MemoryVariable {
  std::string name;
  std::vector<std::string> dims;   // dimension names, outermost first
  std::vector<std::size_t> shape;  // lengths, one per dimension
  StoredType type = StoredType::float64;
  geo::AttributeList attributes;
  const double* values = nullptr;  // row-major (product of shape values); not owned; nullptr: text or not given
};

/// A dataset held in memory (e.g. one block of an xarray dataset): what a NetCDF file would hold,
/// read by the same rules as a file (quantities, units, packing, checks) without netCDF-C.
struct MemoryDataset {
  std::string name;  // shown in messages where a file name would be
  std::vector<MemoryVariable> variables;
  geo::AttributeList attributes;  // global attributes
};

/// The input files of one analysis, opened together.
class InputDataset {
 public:
  /// Open the files: several time steps of one grid (concatenated along time) and/or
  /// fields split across files. Throws InputError naming file, variable and expectation,
  /// also for an implausible quantity (src/io/plausibility.hpp).
  InputDataset(const std::vector<std::string>& paths, const InputAliases& aliases,
               const InputConventions& conventions = {});
  /// Read a dataset held in memory by the rules of a file (`dataset` must outlive the result).
  /// check_sample false: the quantities are not judged on sampled columns (a part of a dataset
  /// judged as a whole elsewhere, or a description without field values).
  static std::unique_ptr<InputDataset> from_memory(const MemoryDataset& dataset, const InputAliases& aliases,
                                                   const InputConventions& conventions = {},
                                                   bool check_sample = true);
  ~InputDataset();
  InputDataset(const InputDataset&) = delete;
  InputDataset& operator=(const InputDataset&) = delete;

  const GridDescription& grid() const;
  HumidityKind humidity_kind() const;
  const std::vector<std::string>& paths() const;
  /// The variables used, one per quantity (temperature, humidity, geopotential, surface pressure
  /// or the surface height it is derived from).
  std::vector<QuantitySource> sources() const;
  /// Surface pressure read, derived from surface geopotential/orography (ln p interpolation of the
  /// column's heights, thermo::surface_pressure_from_height_pa), or none (below-ground levels analysed).
  SurfacePressureSource surface_pressure_source() const;
  /// When quantities come on different pressure levels: which levels each has and that the
  /// analysis uses the common ones (one line); "" when every quantity has the same levels.
  const std::string& common_levels_note() const;
  /// The NetCDF file holding the grid coordinates (for GRIB input: the staged NetCDF file).
  std::string grid_netcdf_path() const;

  /// Size the chunk caches of compressed/chunked inputs so that reading blocks of this many
  /// columns decompresses each chunk once per step (capped at 256 MiB per variable).
  void prepare_block_reads(std::size_t block_columns) const;

  /// Read columns `range` of outer step `step` into block (resized as needed).
  /// Thread-safe (serialised on the netCDF lock); InputError when a read fails.
  void read_block(std::size_t step, ColumnRange range, ColumnBlock& block) const;

  /// Decode step `step` ahead of read_block where the input is NetCDF-4 deflated (compressed
  /// chunks read raw, inflated outside the netCDF lock): every thread calling it for the same
  /// step shares the chunks; returns when all are decoded. No-op where netCDF-C reads the input.
  void decode_step(std::size_t step) const;
  /// decode_step(step) on every OpenMP thread of the caller (they share the chunks).
  void decode_step_on_all_threads(std::size_t step) const;
  /// Free the values decode_step kept for `step` (read_block of it reads the file again).
  void release_step(std::size_t step) const;
  /// Free every decoded step but `step` (the sample steps the constructor decoded, when a run
  /// starts elsewhere).
  void release_steps_except(std::size_t step) const;
  /// Number of input variables read through decode_step rather than netCDF-C (0 to 4 per file set).
  std::size_t directly_read_variables() const;

  /// Throw the InputError for a step whose temperature, humidity or height (flag false) is all missing.
  [[noreturn]] void throw_all_missing(std::size_t step, bool any_temp, bool any_humidity, bool any_height) const;

  /// Latitude and longitude (degrees) of every column, row-major; InputError when the input has none.
  void column_lat_lon(std::vector<double>& lat_deg, std::vector<double>& lon_deg) const;

  struct Impl;
  const Impl& impl() const { return *impl_; }

 private:
  InputDataset();
  std::unique_ptr<Impl> impl_;
};

/// Scalar output fields of one outer step, keyed by DESIGN output names, in output units
/// (hPa, K, m, J kg-1); NaN (real) or -1 (byte) = missing; row-major over the columns.
struct FieldSet {
  std::size_t n_columns = 0;
  std::map<std::string, std::vector<float>> real;
  std::map<std::string, std::vector<std::int8_t>> byte;
  QcCounts qc;
  /// With level fields, from analyze_in_memory: stability_class per [level][column], input level order.
  std::vector<std::int8_t> stability_class_levels;
};

/// Per-level output fields of one block, [field][level][column in block].
struct LevelFieldBlock {
  ColumnRange range;
  int n_levels = 0;
  std::map<std::string, std::vector<float>> real;
  std::map<std::string, std::vector<std::int8_t>> byte;
};

/// Names of the output fields (DESIGN.md), in file order.
const std::vector<std::string>& real_field_names();        // latent_layer_depth ... easiest_lift_pressure
const std::vector<std::string>& byte_field_names();        // latent_class
const std::vector<std::string>& real_level_field_names();  // wet_bulb_temperature ... max_parcel_excess
const std::vector<std::string>& byte_level_field_names();  // latent_flag, stability_class, potential_instability

struct OutputOptions {
  bool level_fields = false;
  bool overwrite = false;
  int deflate_level = 1;                   // 0 (none) to 9
  std::size_t block_columns = 65536;       // chunking of per-level fields follows the blocks
  std::vector<std::size_t> time_indices;   // input time indices written (empty: all)
  std::string history;                     // command line, appended to the history attribute
  std::string settings;                    // settings record (global attribute)
};

/// A CF-1.8 NetCDF-4 output file, written to "<target>.tmp-<pid>" and renamed into place by commit().
class OutputWriter {
 public:
  /// Refuses an existing target without options.overwrite (UsageError).
  OutputWriter(const std::string& target, const InputDataset& input, const OutputOptions& options);
  /// Removes the temporary file unless commit() succeeded.
  ~OutputWriter();
  OutputWriter(const OutputWriter&) = delete;
  OutputWriter& operator=(const OutputWriter&) = delete;

  /// Number of outer steps in the output (time subset x other outer dimensions).
  std::size_t n_steps() const;
  /// The input step written at output step out_step.
  std::size_t input_step(std::size_t out_step) const;
  void write_fields(std::size_t out_step, const FieldSet& fields);
  /// True when maps are chunked in bands of block rows: write each block with write_fields_block.
  bool writes_by_block() const;
  /// Write columns `range` (whole rows) of the full-map arrays in fields.
  void write_fields_block(std::size_t out_step, ColumnRange range, const FieldSet& fields);
  void write_level_block(std::size_t out_step, const LevelFieldBlock& block);
  /// Record the QC counts, close and rename into place.
  void commit(const QcCounts& qc);
  const std::string& temporary_path() const;

  struct Impl;

 private:
  std::unique_ptr<Impl> impl_;
};

/// Copy the input's grid_mapping variable (and its attributes) to the output; the single
/// place where a CRS completion (crs_wkt from PROJ) hooks in. ncid_in/ncid_out are netCDF ids.
void write_grid_mapping(int ncid_in, int ncid_out, const std::string& grid_mapping_name,
                        const std::string& input_file);

}  // namespace latentlift
