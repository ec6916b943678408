// The gridded analysis: read blocks of columns, run the column kernel on every column
// (OpenMP, one ColumnAnalyzer per thread; results independent of the thread count),
// write CF NetCDF or hand the fields over in memory. Reading and writing overlap the analysis.
#pragma once

#include <cstddef>
#include <functional>
#include <string>
#include <vector>

#include "latentlift/config.hpp"
#include "latentlift/netcdf_io.hpp"

namespace latentlift {

/// Where a run is (called from the calling thread after each block).
struct Progress {
  std::size_t step = 0, n_steps = 0;          // outer step being analysed (0-based) / total
  std::size_t columns_done = 0, n_columns = 0;  // columns of this step done / per step
};

struct PipelineOptions {
  RunConfig config;                        // analysis settings, block size, deflate level
  bool level_fields = false;               // also the per-level fields (--level-fields)
  int threads = 0;                         // > 0 overrides config.threads (0: all cores)
  std::vector<std::size_t> time_indices;   // input time indices to analyse (empty: all), e.g. one MPI rank's share
  std::function<void(const Progress&)> progress;  // optional
  /// One part of a larger dataset (e.g. one Dask block): a part in which no column can be analysed,
  /// or whose quantity is missing everywhere at a step, is no error (those judge a whole dataset).
  bool part_of_dataset = false;
};

struct RunSummary {
  std::size_t steps = 0;        // outer steps analysed
  std::size_t columns = 0;      // columns seen (steps x columns per step)
  QcCounts qc;                  // summed over every column
  double seconds = 0.0;         // wall time of the whole run
  double input_wait_seconds = 0.0;   // analysis threads idle, waiting for input blocks
  double output_wait_seconds = 0.0;  // waiting for output writes (and the final close)
};

/// Analyse `input` and write `output` (CF-1.8 NetCDF-4; temporary file renamed into place).
/// output_options.level_fields/time_indices/block_columns/deflate_level are taken from options.
RunSummary analyze_to_file(const InputDataset& input, const std::string& output, const PipelineOptions& options,
                           OutputOptions output_options);

/// Analyse `input` in memory: consumer(input_step, fields) is called once per outer step of the
/// chosen time indices, in order, with the scalar fields (DESIGN names, output units); with
/// options.level_fields also FieldSet::stability_class_levels.
/// level_consumer, when given (with options.level_fields), gets every block of per-level fields
/// (called from the I/O thread, before consumer of the same step).
RunSummary analyze_in_memory(
    const InputDataset& input, const PipelineOptions& options,
    const std::function<void(std::size_t input_step, const FieldSet& fields)>& consumer,
    const std::function<void(std::size_t input_step, const LevelFieldBlock& block)>& level_consumer = {});

/// Number of scalar real fields (real_field_names().size()).
constexpr std::size_t kScalarFieldCount = 16;
/// The scalar real fields of one column in output units (hPa, K, m, J kg-1), in real_field_names() order.
void scalar_field_values(const ColumnResult& result, float* values);

/// The input steps (flattened outer indices) covering the given time indices (all when empty).
std::vector<std::size_t> steps_of_times(const GridDescription& grid, const std::vector<std::size_t>& time_indices);

}  // namespace latentlift
