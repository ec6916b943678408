#include "io/netcdf_util.hpp"

#include <hdf5.h>
#include <netcdf.h>
#include <sys/statvfs.h>

#include <atomic>
#include <cctype>
#include <cerrno>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <utility>

#include "io/plausibility.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

std::string utc_timestamp() {
  const std::time_t now = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&now, &tm);  // reentrant: analyses run on several threads
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return text;
}

void quiet_library_errors() {
  // HDF5 (under netCDF-4) prints its error stack to stderr by default, per thread in its
  // thread-safe build; our errors are one line, so turn it off on every thread that calls netCDF.
  thread_local const bool quiet = H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr) >= 0;
  (void)quiet;
}

std::mutex& netcdf_mutex() {
  static std::mutex mutex;
  quiet_library_errors();
  return mutex;
}

std::string system_reason(int status, const std::string& file) {
  // errno belongs to the failing call only when the storage says so: a full or failing disk.
  const int error = errno;
  const std::filesystem::path parent = std::filesystem::absolute(file).parent_path();
  struct statvfs fs {};
  const bool full = statvfs(parent.c_str(), &fs) == 0 && fs.f_bavail == 0;
  if (full || error == ENOSPC) return std::strerror(ENOSPC);
  if (error == EDQUOT || error == EFBIG || error == EIO || error == EROFS) return std::strerror(error);
  return nc_strerror(status);
}

void check(int status, const std::string& file, const std::string& what) {
  if (status != NC_NOERR) throw Error(file + ": " + what + ": " + system_reason(status, file));
}

namespace {

/// Classic formats (CDF-1/2/5) read past the end of a truncated file without an error, so
/// compare the file size with the bytes its variables need (a lower bound: header not counted).
void check_complete(int ncid, const std::string& path) {
  int format = 0;
  if (nc_inq_format(ncid, &format) != NC_NOERR) return;
  if (format != NC_FORMAT_CLASSIC && format != NC_FORMAT_64BIT_OFFSET && format != NC_FORMAT_CDF5) return;
  int nvars = 0, unlimited = -1;
  nc_inq_nvars(ncid, &nvars);
  nc_inq_unlimdim(ncid, &unlimited);
  unsigned long long needed = 0;
  for (int v = 0; v < nvars; ++v) {
    VarShape shape = var_shape(ncid, v);
    size_t type_size = 0;
    nc_inq_type(ncid, var_type(ncid, v), nullptr, &type_size);
    unsigned long long bytes = type_size;
    for (size_t length : shape.lengths) bytes *= length;
    if (shape.dimids.empty() || shape.dimids[0] != unlimited) bytes = (bytes + 3) / 4 * 4;  // padded to 4 bytes
    needed += bytes;
  }
  std::error_code ec;
  unsigned long long size = std::filesystem::file_size(path, ec);
  if (!ec && size < needed)
    throw InputError(path, "", "a complete NetCDF file (its variables need at least " + std::to_string(needed) +
                                   " bytes, the file has " + std::to_string(size) + "; truncated?)");
}

}  // namespace

namespace {

/// Why a file could not be opened as NetCDF, from the status and its first bytes.
std::string open_failure(int status, const std::string& path) {
  std::error_code ec;
  if (std::filesystem::is_directory(path, ec)) return "expected a NetCDF file, found a directory";
  std::ifstream in(path, std::ios::binary);
  if (!in) return std::string("expected a readable NetCDF file (") + std::strerror(errno == 0 ? EACCES : errno) + ")";
  char head[8] = {0};
  in.read(head, sizeof head);
  const std::streamsize n = in.gcount();
  const std::uintmax_t size = std::filesystem::file_size(path, ec);
  if (n == 0) return "expected a NetCDF file, found an empty file";
  const bool classic = n >= 4 && head[0] == 'C' && head[1] == 'D' && head[2] == 'F' && (head[3] == 1 || head[3] == 2 || head[3] == 5);
  const bool hdf5 = n >= 8 && std::memcmp(head, "\x89HDF\r\n\x1a\n", 8) == 0;
  if (!classic && !hdf5) {
    std::string shown;
    for (std::streamsize i = 0; i < std::min<std::streamsize>(n, 4); ++i)
      shown += std::isprint(static_cast<unsigned char>(head[i])) ? std::string(1, head[i]) : "?";
    return "expected a NetCDF file (classic 'CDF' or NetCDF-4/HDF5) or a GRIB file, found one starting with '" + shown + "'";
  }
  const std::string kind = classic ? "classic NetCDF" : "NetCDF-4/HDF5";
  // Positive statuses are system errno values from netCDF's own file handling; inside a
  // file that starts like NetCDF they mean damage, not the system (e.g. a wild length read).
  const std::string reason = status > 0 ? "unreadable structure" : nc_strerror(status);
  return "a readable NetCDF file: this " + kind + " file of " + std::to_string(size) + " bytes is damaged or truncated (" +
         reason + ")";
}

}  // namespace

NcFile NcFile::open_read(const std::string& path, const std::string& shown_as) {
  NcFile file;
  quiet_library_errors();
  errno = 0;
  int status = nc_open(path.c_str(), NC_NOWRITE, &file.id_);
  if (status != NC_NOERR) {
    file.id_ = -1;
    throw InputError(shown_as.empty() ? path : shown_as, "", open_failure(status, path));
  }
  file.path_ = shown_as.empty() ? path : shown_as;
  check_complete(file.id_, path);
  return file;
}

NcFile NcFile::create_netcdf4(const std::string& path, const std::string& reported_as) {
  NcFile file;
  quiet_library_errors();
  file.path_ = reported_as.empty() ? path : reported_as;
  int status = nc_create(path.c_str(), NC_CLOBBER | NC_NETCDF4, &file.id_);
  if (status != NC_NOERR) {
    file.id_ = -1;
    check(status, file.path_, "cannot create");
  }
  return file;
}

namespace {

std::atomic<bool> g_left_open{false};

/// Close a dataset. When nc_close fails (a full disk while flushing), netCDF-C 4.9.0 keeps the
/// dataset half torn down and HDF5 1.10.8 its file: nc_abort then crashes, and so does HDF5's exit
/// handler; the process has to end without exit handlers (netcdf_files_left_open, main.cpp).
int close_for_good(int id) {
  const int status = nc_close(id);
  if (status != NC_NOERR) g_left_open = true;
  return status;
}

}  // namespace

bool netcdf_files_left_open() { return g_left_open; }

NcFile::~NcFile() {
  if (id_ >= 0) close_for_good(id_);
}

NcFile::NcFile(NcFile&& other) noexcept
    : id_(std::exchange(other.id_, -1)), path_(std::move(other.path_)) {}

NcFile& NcFile::operator=(NcFile&& other) noexcept {
  if (this != &other) {
    if (id_ >= 0) close_for_good(id_);
    id_ = std::exchange(other.id_, -1);
    path_ = std::move(other.path_);
  }
  return *this;
}

void NcFile::close() {
  if (id_ < 0) return;
  int id = std::exchange(id_, -1);
  check(close_for_good(id), path_, "closing");
}

std::string var_name(int ncid, int varid) {
  char name[NC_MAX_NAME + 1] = {0};
  nc_inq_varname(ncid, varid, name);
  return name;
}

VarShape var_shape(int ncid, int varid) {
  VarShape shape;
  int ndims = 0;
  nc_inq_varndims(ncid, varid, &ndims);
  shape.dimids.resize(ndims);
  if (ndims > 0) nc_inq_vardimid(ncid, varid, shape.dimids.data());
  for (int id : shape.dimids) {
    char name[NC_MAX_NAME + 1] = {0};
    size_t length = 0;
    nc_inq_dim(ncid, id, name, &length);
    shape.names.emplace_back(name);
    shape.lengths.push_back(length);
  }
  return shape;
}

int var_type(int ncid, int varid) {
  nc_type type = NC_NAT;
  nc_inq_vartype(ncid, varid, &type);
  return type;
}

int find_var(int ncid, const std::string& name) {
  int varid = -1;
  if (nc_inq_varid(ncid, name.c_str(), &varid) != NC_NOERR) return -1;
  return varid;
}

int coordinate_var(int ncid, const std::string& dim_name) {
  int varid = find_var(ncid, dim_name);
  if (varid < 0) return -1;
  VarShape shape = var_shape(ncid, varid);
  if (shape.names.size() != 1 || shape.names[0] != dim_name) return -1;
  return varid;
}

bool has_attribute(int ncid, int varid, const char* name) {
  return nc_inq_att(ncid, varid, name, nullptr, nullptr) == NC_NOERR;
}

std::string text_attribute(int ncid, int varid, const char* name) {
  nc_type type = NC_NAT;
  size_t length = 0;
  if (nc_inq_att(ncid, varid, name, &type, &length) != NC_NOERR) return "";
  std::string text;
  if (type == NC_CHAR) {
    text.resize(length);
    if (length > 0) nc_get_att_text(ncid, varid, name, text.data());
  } else if (type == NC_STRING && length >= 1) {
    std::vector<char*> values(length, nullptr);
    nc_get_att_string(ncid, varid, name, values.data());
    if (values[0]) text = values[0];
    nc_free_string(length, values.data());
  } else {
    return "";
  }
  while (!text.empty() && (text.back() == '\0' || text.back() == ' ' || text.back() == '\n')) text.pop_back();
  size_t first = text.find_first_not_of(' ');
  return first == std::string::npos ? "" : text.substr(first);
}

std::vector<double> number_attribute(int ncid, int varid, const char* name) {
  nc_type type = NC_NAT;
  size_t length = 0;
  if (nc_inq_att(ncid, varid, name, &type, &length) != NC_NOERR) return {};
  if (type == NC_CHAR || type == NC_STRING) return {};
  std::vector<double> values(length);
  if (length > 0 && nc_get_att_double(ncid, varid, name, values.data()) != NC_NOERR) return {};
  return values;
}

void check_packing_attributes(int ncid, int varid, const std::string& file, const std::string& variable) {
  for (const char* name : {"scale_factor", "add_offset", "_FillValue", "missing_value", "valid_range", "valid_min",
                           "valid_max"}) {
    AttributeValue value;
    nc_type type = NC_NAT;
    size_t length = 0;
    if (nc_inq_att(ncid, varid, name, &type, &length) != NC_NOERR) continue;
    value.present = true;
    value.is_text = type == NC_CHAR || type == NC_STRING;
    if (value.is_text)
      value.text = text_attribute(ncid, varid, name);
    else
      value.numbers = number_attribute(ncid, varid, name);
    check_packing_attribute(file, variable, name, value);
  }
}

std::vector<double> read_all_doubles(int ncid, int varid, const std::string& file) {
  VarShape shape = var_shape(ncid, varid);
  size_t n = 1;
  double bytes = 8.0;
  for (size_t length : shape.lengths) {
    n *= length;
    bytes *= static_cast<double>(length);
  }
  const std::string name = var_name(ncid, varid);
  check_memory(file, name, "reading it", bytes);
  std::vector<double> values(n);
  if (n == 0) return values;
  const int status = nc_get_var_double(ncid, varid, values.data());
  if (status == NC_ECHAR)
    throw InputError(file, name, "numbers (found " + std::string(var_type(ncid, varid) == NC_STRING ? "strings" : "characters") + ")");
  if (status != NC_NOERR)
    throw InputError(file, name, std::string("readable values (") + nc_strerror(status) + "; is the file damaged or truncated?)");
  return values;
}

}  // namespace latentlift::io::detail
