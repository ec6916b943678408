// The shape of an input grid as the reader found it: horizontal grid, pressure levels,
// outer dimensions (time, ensemble member, forecast step ...), and blocks of columns.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace latentlift {

/// Regular lat/lon (1-D coordinates), projected x/y (2-D lat/lon, grid_mapping), or one cell dimension.
enum class HorizontalKind { latlon, projected, unstructured };

struct Dimension {
  std::string name;
  std::size_t length = 0;
};

/// A dimension outside the column: time (concatenated over input files) or another one carried through.
struct OuterDimension {
  std::string name;
  std::size_t length = 0;
  bool is_time = false;
};

struct GridDescription {
  HorizontalKind kind = HorizontalKind::latlon;
  std::vector<Dimension> horizontal;        // 1 or 2, in the input's order (slowest first)
  std::size_t n_columns = 0;                // product of the horizontal lengths
  Dimension vertical;                       // the pressure dimension
  std::vector<double> pressure_pa;          // level pressures (Pa) in the input's order
  std::vector<OuterDimension> outer;        // in the input's order; may be empty
  std::size_t n_steps = 1;                  // product of the outer lengths
  std::size_t n_times = 1;                  // length of the time dimension (1 without one)
  std::vector<double> time_values;          // time coordinate (all files), empty without one
  std::string time_units, time_calendar;    // as in the input ("hours since ...")
  std::string grid_mapping;                 // name of the input's grid_mapping variable, "" if none
  std::string coordinates;                  // auxiliary coordinates attribute ("lat lon"), "" if none
};

/// A run of columns, contiguous in row-major order over the horizontal dimensions.
struct ColumnRange {
  std::size_t begin = 0;
  std::size_t count = 0;
};

/// Blocks of at most block_columns columns, each a hyperslab (whole rows, or part of one row).
std::vector<ColumnRange> column_blocks(const GridDescription& grid, std::size_t block_columns);

/// Index of each outer dimension of the flattened step index (row-major over grid.outer).
std::vector<std::size_t> step_indices(const GridDescription& grid, std::size_t step);

/// Index of the time dimension of a step (0 without a time dimension).
std::size_t time_index_of_step(const GridDescription& grid, std::size_t step);

}  // namespace latentlift
