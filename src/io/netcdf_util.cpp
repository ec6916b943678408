#include "io/netcdf_util.hpp"

#include <netcdf.h>

#include <ctime>
#include <filesystem>
#include <utility>

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

std::mutex& netcdf_mutex() {
  static std::mutex mutex;
  return mutex;
}

void check(int status, const std::string& file, const std::string& what) {
  if (status != NC_NOERR) throw Error(file + ": " + what + ": " + nc_strerror(status));
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

NcFile NcFile::open_read(const std::string& path, const std::string& shown_as) {
  NcFile file;
  int status = nc_open(path.c_str(), NC_NOWRITE, &file.id_);
  if (status != NC_NOERR) {
    file.id_ = -1;
    throw InputError(path, "", std::string("expected a readable NetCDF or GRIB file (") + nc_strerror(status) + ")");
  }
  file.path_ = shown_as.empty() ? path : shown_as;
  check_complete(file.id_, path);
  return file;
}

NcFile NcFile::create_netcdf4(const std::string& path) {
  NcFile file;
  int status = nc_create(path.c_str(), NC_CLOBBER | NC_NETCDF4, &file.id_);
  if (status != NC_NOERR) {
    file.id_ = -1;
    check(status, path, "cannot create");
  }
  file.path_ = path;
  return file;
}

NcFile::~NcFile() {
  if (id_ >= 0) nc_close(id_);
}

NcFile::NcFile(NcFile&& other) noexcept
    : id_(std::exchange(other.id_, -1)), path_(std::move(other.path_)) {}

NcFile& NcFile::operator=(NcFile&& other) noexcept {
  if (this != &other) {
    if (id_ >= 0) nc_close(id_);
    id_ = std::exchange(other.id_, -1);
    path_ = std::move(other.path_);
  }
  return *this;
}

void NcFile::close() {
  if (id_ < 0) return;
  int id = std::exchange(id_, -1);
  check(nc_close(id), path_, "closing");
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

std::vector<double> read_all_doubles(int ncid, int varid, const std::string& file) {
  VarShape shape = var_shape(ncid, varid);
  size_t n = 1;
  for (size_t length : shape.lengths) n *= length;
  std::vector<double> values(n);
  if (n > 0) check(nc_get_var_double(ncid, varid, values.data()), file, "reading " + var_name(ncid, varid));
  return values;
}

}  // namespace latentlift::io::detail
