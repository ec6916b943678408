// The command line: subcommands analyze, column, climatology, reproject, quicklook.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace latentlift {
struct MemoryDataset;
}

namespace latentlift::cli {

/// Parse argv and run the subcommand; returns the exit code (0 ok, 1 runtime failure, 2 bad usage or input).
int run(int argc, char** argv);

/// The report of `latentlift column` ("table", "csv" or "json") for the grid column nearest
/// (great-circle) to lat_deg/lon_deg (degrees) at time_index; throws like the command does.
std::string column_report(const std::vector<std::string>& inputs, double lat_deg, double lon_deg,
                          std::size_t time_index, const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides);
/// The same report for a dataset held in memory (include/latentlift/netcdf_io.hpp), named dataset.name.
std::string column_report(const MemoryDataset& dataset, double lat_deg, double lon_deg, std::size_t time_index,
                          const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides);

}  // namespace latentlift::cli
