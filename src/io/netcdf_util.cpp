#include "io/netcdf_util.hpp"

#include <hdf5.h>
#include <netcdf.h>
#include <sys/statvfs.h>

#include <algorithm>
#include <atomic>
#include <cctype>
#include <cerrno>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <map>
#include <utility>
#include <variant>

#include "io/classic_header.hpp"
#include "io/global_heap.hpp"
#include "io/plausibility.hpp"
#include "io/structure_probe.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"

namespace latentlift::io::detail {

namespace {

// Datasets held in memory, by id: ids from kFirstMemoryId downwards (netCDF-C ids are >= 0,
// -1 means "none" in this layer).
constexpr int kFirstMemoryId = -1000000;

struct MemoryRegistry {
  std::mutex mutex;
  std::map<int, const MemoryDataset*> datasets;
  int next = kFirstMemoryId;
};

MemoryRegistry& memory_registry() {
  static MemoryRegistry registry;
  return registry;
}

int register_memory(const MemoryDataset& dataset) {
  MemoryRegistry& r = memory_registry();
  std::lock_guard<std::mutex> lock(r.mutex);
  const int id = r.next--;
  if (r.next > kFirstMemoryId) r.next = kFirstMemoryId;  // wrapped around after 2^31 datasets
  r.datasets[id] = &dataset;
  return id;
}

void unregister_memory(int id) {
  MemoryRegistry& r = memory_registry();
  std::lock_guard<std::mutex> lock(r.mutex);
  r.datasets.erase(id);
}

const MemoryDataset& memory_of(int ncid) {
  MemoryRegistry& r = memory_registry();
  std::lock_guard<std::mutex> lock(r.mutex);
  auto it = r.datasets.find(ncid);
  if (it == r.datasets.end()) throw Error("dataset id " + std::to_string(ncid) + " is not open");
  return *it->second;
}

/// The variable varid of a dataset in memory, or nullptr.
const MemoryVariable* memory_var(int ncid, int varid) {
  const MemoryDataset& m = memory_of(ncid);
  if (varid < 0 || static_cast<std::size_t>(varid) >= m.variables.size()) return nullptr;
  return &m.variables[static_cast<std::size_t>(varid)];
}

/// The attributes of variable varid (NC_GLOBAL: the dataset's), or nullptr.
const geo::AttributeList* memory_attributes(int ncid, int varid) {
  if (varid == NC_GLOBAL) return &memory_of(ncid).attributes;
  const MemoryVariable* var = memory_var(ncid, varid);
  return var ? &var->attributes : nullptr;
}

const geo::Attribute* memory_attribute(int ncid, int varid, const char* name) {
  const geo::AttributeList* attributes = memory_attributes(ncid, varid);
  return attributes ? geo::find_attribute(*attributes, name) : nullptr;
}

nc_type nc_type_of(StoredType type) {
  switch (type) {
    case StoredType::int8: return NC_BYTE;
    case StoredType::uint8: return NC_UBYTE;
    case StoredType::int16: return NC_SHORT;
    case StoredType::uint16: return NC_USHORT;
    case StoredType::int32: return NC_INT;
    case StoredType::uint32: return NC_UINT;
    case StoredType::int64: return NC_INT64;
    case StoredType::uint64: return NC_UINT64;
    case StoredType::float32: return NC_FLOAT;
    case StoredType::float64: return NC_DOUBLE;
    case StoredType::text: return NC_STRING;
  }
  return NC_NAT;
}

/// Text attribute values as the reader compares them: trailing NULs/blanks/newlines and leading blanks removed.
std::string trimmed(std::string text) {
  while (!text.empty() && (text.back() == '\0' || text.back() == ' ' || text.back() == '\n')) text.pop_back();
  size_t first = text.find_first_not_of(' ');
  return first == std::string::npos ? "" : text.substr(first);
}

}  // namespace

bool is_memory_id(int ncid) { return ncid <= kFirstMemoryId; }

int variable_count(int ncid) {
  if (is_memory_id(ncid)) return static_cast<int>(memory_of(ncid).variables.size());
  int nvars = 0;
  nc_inq_nvars(ncid, &nvars);
  return nvars;
}

int read_slab_doubles(int ncid, int varid, const std::size_t* start, const std::size_t* count, double* out) {
  if (!is_memory_id(ncid)) return nc_get_vara_double(ncid, varid, start, count, out);
  const MemoryVariable* var = memory_var(ncid, varid);
  if (!var) return NC_ENOTVAR;
  if (!var->values) return NC_ECHAR;
  const std::size_t ndims = var->shape.size();
  for (std::size_t i = 0; i < ndims; ++i)
    if (start[i] + count[i] > var->shape[i]) return NC_EEDGE;
  std::vector<std::size_t> stride(ndims, 1);
  for (std::size_t i = ndims; i-- > 1;) stride[i - 1] = stride[i] * var->shape[i];
  std::size_t total = 1;
  for (std::size_t i = 0; i < ndims; ++i) total *= count[i];
  if (total == 0) return NC_NOERR;
  // Copy runs of the innermost dimension, counting through the outer ones like an odometer.
  const std::size_t run = ndims ? count[ndims - 1] : 1;
  std::vector<std::size_t> index(ndims, 0);
  for (std::size_t done = 0; done < total; done += run) {
    std::size_t at = 0;
    for (std::size_t i = 0; i < ndims; ++i) at += (start[i] + index[i]) * stride[i];
    std::copy_n(var->values + at, run, out + done);
    for (std::size_t i = ndims - 1; ndims > 0 && i-- > 0;) {
      if (++index[i] < count[i]) break;
      index[i] = 0;
    }
  }
  return NC_NOERR;
}

std::vector<std::string> attribute_names(int ncid, int varid) {
  std::vector<std::string> names;
  if (is_memory_id(ncid)) {
    if (const geo::AttributeList* attributes = memory_attributes(ncid, varid))
      for (const geo::Attribute& a : *attributes) names.push_back(a.name);
    return names;
  }
  int natts = 0;
  if (varid == NC_GLOBAL)
    nc_inq_natts(ncid, &natts);
  else
    nc_inq_varnatts(ncid, varid, &natts);
  for (int a = 0; a < natts; ++a) {
    char name[NC_MAX_NAME + 1] = {0};
    if (nc_inq_attname(ncid, varid, a, name) == NC_NOERR) names.emplace_back(name);
  }
  return names;
}

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

std::string storage_reason(const std::string& file) {
  // errno belongs to the failing call only when the storage says so: a full or failing disk.
  const int error = errno;
  std::error_code ec;
  const std::filesystem::path parent = std::filesystem::absolute(file, ec).parent_path();
  struct statvfs fs {};
  const bool full = statvfs(parent.c_str(), &fs) == 0 && fs.f_bavail == 0;
  if (full || error == ENOSPC) return std::strerror(ENOSPC);
  if (error == EDQUOT || error == EFBIG || error == EIO || error == EROFS) return std::strerror(error);
  return "";
}

std::string system_reason(int status, const std::string& file) {
  const std::string storage = storage_reason(file);
  return storage.empty() ? nc_strerror(status) : storage;
}

void check(int status, const std::string& file, const std::string& what) {
  if (status != NC_NOERR) throw Error(file + ": " + what + ": " + system_reason(status, file));
}

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
  // Damage that netCDF-C 4.9.0 or HDF5 1.10.8 would loop on for ever, refused before they read it.
  check_classic_header(path, shown_as);
  check_global_heaps(path, shown_as);
  probe_netcdf4_structure(path, shown_as);  // a crash or hang of HDF5 on other damage stays in a child
  errno = 0;
  int status = nc_open(path.c_str(), NC_NOWRITE, &file.id_);
  if (status != NC_NOERR) {
    file.id_ = -1;
    throw InputError(shown_as.empty() ? path : shown_as, "", open_failure(status, path));
  }
  file.path_ = shown_as.empty() ? path : shown_as;
  return file;
}

NcFile NcFile::open_memory(const MemoryDataset& dataset) {
  NcFile file;
  file.id_ = register_memory(dataset);
  file.path_ = dataset.name;
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
  if (is_memory_id(id_))
    unregister_memory(id_);
  else if (id_ >= 0)
    close_for_good(id_);
}

NcFile::NcFile(NcFile&& other) noexcept
    : id_(std::exchange(other.id_, -1)), path_(std::move(other.path_)) {}

NcFile& NcFile::operator=(NcFile&& other) noexcept {
  if (this != &other) {
    if (is_memory_id(id_))
      unregister_memory(id_);
    else if (id_ >= 0)
      close_for_good(id_);
    id_ = std::exchange(other.id_, -1);
    path_ = std::move(other.path_);
  }
  return *this;
}

void NcFile::close() {
  if (is_memory_id(id_)) unregister_memory(std::exchange(id_, -1));
  if (id_ < 0) return;
  int id = std::exchange(id_, -1);
  check(close_for_good(id), path_, "closing");
}

std::string var_name(int ncid, int varid) {
  if (is_memory_id(ncid)) {
    const MemoryVariable* var = memory_var(ncid, varid);
    return var ? var->name : "";
  }
  char name[NC_MAX_NAME + 1] = {0};
  nc_inq_varname(ncid, varid, name);
  return name;
}

VarShape var_shape(int ncid, int varid) {
  VarShape shape;
  if (is_memory_id(ncid)) {  // dimension ids: positions in the variable (not shared between variables)
    if (const MemoryVariable* var = memory_var(ncid, varid))
      for (std::size_t i = 0; i < var->dims.size(); ++i) {
        shape.dimids.push_back(static_cast<int>(i));
        shape.names.push_back(var->dims[i]);
        shape.lengths.push_back(var->shape[i]);
      }
    return shape;
  }
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
  if (is_memory_id(ncid)) {
    const MemoryVariable* var = memory_var(ncid, varid);
    return var ? nc_type_of(var->type) : NC_NAT;
  }
  nc_type type = NC_NAT;
  nc_inq_vartype(ncid, varid, &type);
  return type;
}

int find_var(int ncid, const std::string& name) {
  if (is_memory_id(ncid)) {
    const MemoryDataset& m = memory_of(ncid);
    for (std::size_t v = 0; v < m.variables.size(); ++v)
      if (m.variables[v].name == name) return static_cast<int>(v);
    return -1;
  }
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
  if (is_memory_id(ncid)) return memory_attribute(ncid, varid, name) != nullptr;
  return nc_inq_att(ncid, varid, name, nullptr, nullptr) == NC_NOERR;
}

std::string text_attribute(int ncid, int varid, const char* name) {
  if (is_memory_id(ncid)) {
    const geo::Attribute* a = memory_attribute(ncid, varid, name);
    const std::string* text = a ? std::get_if<std::string>(&a->value) : nullptr;
    return text ? trimmed(*text) : "";
  }
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
  return trimmed(std::move(text));
}

std::vector<double> number_attribute(int ncid, int varid, const char* name) {
  if (is_memory_id(ncid)) {
    const geo::Attribute* a = memory_attribute(ncid, varid, name);
    const std::vector<double>* numbers = a ? std::get_if<std::vector<double>>(&a->value) : nullptr;
    return numbers ? *numbers : std::vector<double>{};
  }
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
    if (is_memory_id(ncid)) {
      const geo::Attribute* a = memory_attribute(ncid, varid, name);
      if (!a) continue;
      value.is_text = std::holds_alternative<std::string>(a->value);
    } else {
      nc_type type = NC_NAT;
      size_t length = 0;
      if (nc_inq_att(ncid, varid, name, &type, &length) != NC_NOERR) continue;
      value.is_text = type == NC_CHAR || type == NC_STRING;
    }
    value.present = true;
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
  const std::vector<std::size_t> start(shape.lengths.size(), 0);
  const int status = read_slab_doubles(ncid, varid, start.data(), shape.lengths.data(), values.data());
  if (status == NC_ECHAR)
    throw InputError(file, name, "numbers (found " + std::string(var_type(ncid, varid) == NC_STRING ? "strings" : "characters") + ")");
  if (status != NC_NOERR)
    throw InputError(file, name, std::string("readable values (") + nc_strerror(status) + "; is the file damaged or truncated?)");
  return values;
}

}  // namespace latentlift::io::detail
