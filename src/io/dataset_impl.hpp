// Internal to src/io: what the reader found, shared with the writer (which copies coordinates).
#pragma once

#include <cmath>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "io/chunk_reader.hpp"
#include "io/grib_input.hpp"
#include "io/netcdf_util.hpp"
#include "io/units.hpp"
#include "latentlift/netcdf_io.hpp"

namespace latentlift {

namespace io::detail {

/// Role of one dimension of an input variable.
enum class DimRole { vertical, horizontal, outer };

/// One input variable, how to read it and how to turn raw values into SI.
struct VarRef {
  int file = -1;
  int varid = -1;
  int type = 0;                  // netCDF type of the stored values
  std::string name, quantity, units;
  VarShape shape;
  std::vector<DimRole> roles;    // per variable dimension
  std::vector<int> grid_dim;     // per variable dimension: index into grid.horizontal / grid.outer (-1 vertical)
  std::vector<double> fills;     // raw values meaning missing
  double valid_min = -HUGE_VAL, valid_max = HUGE_VAL;  // raw
  double scale = 1.0, offset = 0.0;  // SI = raw * scale + offset (unpacking, units and 1/g folded in)
  double si_per_unit = 1.0, si_offset = 0.0;  // SI = unpacked value in `units` * si_per_unit + si_offset
  bool global_time = false;      // indexed by the time index over all files (not the segment's own)
  std::shared_ptr<ChunkReader> direct;  // set when its chunks are read raw and inflated here (chunk_reader.hpp)
  std::vector<std::size_t> levels;  // per grid level: index along the variable's own pressure dimension
  bool present() const { return varid >= 0; }
};

/// The decoded slabs of one step's directly read variables (see InputDataset::decode_step).
struct DecodedStep {
  std::map<const VarRef*, DecodedSlab> slabs;
  std::unique_ptr<SlabJob> job;
};

/// The variables of one run of time steps (one input file with temperature, plus split-off fields).
struct Segment {
  std::size_t time_offset = 0, time_length = 1;
  VarRef temp, humidity, height, surface_pressure, surface_height;
};

}  // namespace io::detail

struct InputDataset::Impl {
  std::vector<std::string> input_paths;  // as given (paths())
  std::unique_ptr<io::detail::GribStaging> grib;  // GRIB inputs staged as one NetCDF file (outlives files)
  std::vector<std::string> paths;        // per opened file, its name in messages (GRIB: the GRIB files)
  std::vector<io::detail::NcFile> files;
  GridDescription grid;
  HumidityKind humidity_kind = HumidityKind::specific_humidity;
  InputConventions conventions;
  SurfacePressureSource surface_pressure_source = SurfacePressureSource::none;
  std::string common_levels_note;
  std::vector<io::detail::Segment> segments;
  int time_outer = -1;                 // index of the time dimension in grid.outer
  // Where the writer copies coordinates from (file index and variable names in it).
  int grid_file = 0;
  std::string vertical_coordinate;     // coordinate variable of the pressure dimension ("" if none)
  std::string lat_var, lon_var;        // latitude/longitude variables ("" if none)
  std::vector<std::string> horizontal_coordinates;  // 1-D coordinate variables of the horizontal dims
  std::vector<std::string> aux_coordinates;         // 2-D (or cell) lat/lon variables
  std::vector<std::string> outer_coordinates;       // per outer dim, coordinate variable or ""

  // Steps decoded ahead by decode_step, until release_step.
  mutable std::mutex decoded_mutex;
  mutable std::map<std::size_t, std::shared_ptr<io::detail::DecodedStep>> decoded;

  const io::detail::Segment& segment_of_time(std::size_t time_index, std::size_t& local) const;
};

}  // namespace latentlift
