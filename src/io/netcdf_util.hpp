// The one RAII owner of netCDF ids (used by io, gis and stats), status checks and attribute helpers.
// netCDF-C is not thread-safe: io takes netcdf_mutex() around its calls, since its pipeline reads
// and writes on a background thread; code calling netCDF while a pipeline runs must take it too.
#pragma once

#include <cstddef>
#include <mutex>
#include <string>
#include <vector>

namespace latentlift {
struct MemoryDataset;
}

namespace latentlift::io::detail {

/// The one lock around every netCDF-C call in the process (also silences HDF5's error
/// printing on the calling thread).
std::mutex& netcdf_mutex();

/// Turn off HDF5's automatic error printing on this thread (idempotent, cheap).
void quiet_library_errors();

/// The reason of a failed write or close of `file`: "No space left on device" when the disk
/// is full (or errno says so), else the netCDF message.
std::string system_reason(int status, const std::string& file);

/// What the storage says about a failed write of `file` (any writer, e.g. GDAL's): "No space
/// left on device" when its file system is full or errno is ENOSPC, errno's text for a quota,
/// size limit, I/O or read-only error, else "".
std::string storage_reason(const std::string& file);

/// Throw latentlift::Error "<file>: <what>: <nc_strerror>" when status is not NC_NOERR.
void check(int status, const std::string& file, const std::string& what);

/// Owner of an open netCDF dataset id; closes it on destruction.
class NcFile {
 public:
  NcFile() = default;
  /// Open read-only; a file that is not NetCDF or is damaged is an InputError. shown_as: the
  /// name used in messages and path() (e.g. the GRIB files a staged file was made from).
  static NcFile open_read(const std::string& path, const std::string& shown_as = "");
  /// Create a NetCDF-4 file (clobbering path). Messages name it reported_as when given (the
  /// user's target rather than the temporary file written for it).
  static NcFile create_netcdf4(const std::string& path, const std::string& reported_as = "");
  /// A dataset held in memory under an id of its own (is_memory_id), read by the helpers below
  /// like a file opened read-only; named dataset.name in messages. `dataset` must outlive it.
  static NcFile open_memory(const MemoryDataset& dataset);
  ~NcFile();
  NcFile(NcFile&& other) noexcept;
  NcFile& operator=(NcFile&& other) noexcept;
  NcFile(const NcFile&) = delete;
  NcFile& operator=(const NcFile&) = delete;

  int id() const { return id_; }
  const std::string& path() const { return path_; }
  /// Close now, reporting errors (the destructor closes silently).
  void close();

 private:
  int id_ = -1;
  std::string path_;
};

/// True when a dataset could not be closed (its flush failed: disk full). HDF5's exit handler
/// would crash on it, so the executable then ends with _exit after flushing stdio (src/cli/main.cpp).
bool netcdf_files_left_open();

/// A variable's dimension ids, names and lengths.
struct VarShape {
  std::vector<int> dimids;
  std::vector<std::string> names;
  std::vector<std::size_t> lengths;
};

/// Ids of datasets held in memory (NcFile::open_memory) are never netCDF-C ids: every helper
/// below taking an ncid answers for them from memory (no netCDF-C call, no netcdf_mutex needed),
/// so the reader applies one set of rules to files and to memory.
bool is_memory_id(int ncid);
/// Number of variables of a dataset.
int variable_count(int ncid);
/// A hyperslab of a variable as doubles (no unpacking); the netCDF status (NC_NOERR on success).
int read_slab_doubles(int ncid, int varid, const std::size_t* start, const std::size_t* count, double* out);
/// Names of a variable's attributes (NC_GLOBAL: the dataset's), in order.
std::vector<std::string> attribute_names(int ncid, int varid);

std::string var_name(int ncid, int varid);
VarShape var_shape(int ncid, int varid);
int var_type(int ncid, int varid);
/// Id of the variable named name, or -1.
int find_var(int ncid, const std::string& name);
/// Id of the coordinate variable of dimension dim_name (1-D, same name), or -1.
int coordinate_var(int ncid, const std::string& dim_name);
bool has_attribute(int ncid, int varid, const char* name);
/// Text attribute (trimmed), "" when absent or not text.
std::string text_attribute(int ncid, int varid, const char* name);
/// Numeric attribute values as double (empty when absent or text).
std::vector<double> number_attribute(int ncid, int varid, const char* name);
/// The current UTC time as ISO 8601 (YYYY-MM-DDThh:mm:ssZ), for CF history attributes.
std::string utc_timestamp();
/// InputError unless the packing and fill attributes of a variable are well formed
/// (numeric, scalar, finite, non-zero scale: io::detail::check_packing_attribute).
void check_packing_attributes(int ncid, int varid, const std::string& file, const std::string& variable);
/// All values of a variable as double (no unpacking); InputError when unreadable or too large.
std::vector<double> read_all_doubles(int ncid, int varid, const std::string& file);

}  // namespace latentlift::io::detail
