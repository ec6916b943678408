// Internal to src/io: GRIB input (ecCodes). GRIB files are recognised by content and their
// isobaric and surface messages staged, one message at a time, into a temporary CF NetCDF
// file that the NetCDF reader then reads like any other input (one pipeline, one set of checks).
#pragma once

#include <memory>
#include <string>
#include <vector>

namespace latentlift::io::detail {

class ScratchFile;

/// True when the file holds GRIB (edition 1 or 2): "GRIB" within its first 4 KiB (after any
/// WMO bulletin header) and not NetCDF/HDF5.
bool is_grib_file(const std::string& path);

/// The GRIB files of one input, staged into a temporary NetCDF file (removed on destruction and
/// on SIGINT, SIGTERM, SIGHUP: a ScratchFile).
/// Quantities are found by parameter (ecCodes paramId) on isobaricInhPa/isobaricInPa levels
/// (surface pressure and surface height on the surface), in any message order, across files;
/// validity times and ensemble members become dimensions. InputError names file and message.
class GribStaging {
 public:
  explicit GribStaging(const std::vector<std::string>& paths);
  ~GribStaging();
  GribStaging(const GribStaging&) = delete;
  GribStaging& operator=(const GribStaging&) = delete;

  /// The staged NetCDF file.
  const std::string& path() const;
  /// The GRIB files, joined with ", " (how messages name this input).
  const std::string& label() const { return label_; }

 private:
  std::unique_ptr<ScratchFile> staged_;
  std::string label_;
};

}  // namespace latentlift::io::detail
