// Internal netCDF-C layer for reading analysis outputs and writing map grids (maps, stats).
#include "io/netcdf_file.hpp"

#include <cmath>

#include "io/plausibility.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

void check(int status, const std::string& file, const std::string& variable, const std::string& action) {
  if (status == NC_NOERR) return;
  std::string text = file;
  if (!variable.empty()) text += ": variable '" + variable + "'";
  throw Error(text + ": " + action + ": " + system_reason(status, file));
}

namespace {
/// A failed read of an input file: the file is damaged (exit 2), not the machine.
void check_read(int status, const std::string& file, const std::string& variable, const std::string& action) {
  if (status == NC_NOERR) return;
  throw InputError(file, variable, "readable " + action + " (" + nc_strerror(status) + "; is the file damaged or truncated?)");
}
}  // namespace

VarInfo var_info(const NcFile& file, int varid) {
  VarInfo info;
  info.id = varid;
  char name[NC_MAX_NAME + 1] = {0};
  int ndims = 0;
  check_read(nc_inq_var(file.id(), varid, name, &info.type, &ndims, nullptr, nullptr), file.path(), "",
             "variable " + std::to_string(varid));
  info.name = name;
  info.dim_ids.resize(ndims);
  if (ndims > 0) check_read(nc_inq_vardimid(file.id(), varid, info.dim_ids.data()), file.path(), name, "dimensions");
  for (int dim : info.dim_ids) {
    char dim_name[NC_MAX_NAME + 1] = {0};
    std::size_t length = 0;
    check_read(nc_inq_dim(file.id(), dim, dim_name, &length), file.path(), name, "dimension");
    info.dim_names.push_back(dim_name);
    info.shape.push_back(length);
  }
  return info;
}

std::vector<VarInfo> all_variables(const NcFile& file) {
  int count = 0;
  check_read(nc_inq_nvars(file.id(), &count), file.path(), "", "variables");
  std::vector<VarInfo> out;
  for (int i = 0; i < count; ++i) out.push_back(var_info(file, i));
  return out;
}

std::optional<VarInfo> find_variable(const NcFile& file, const std::string& name) {
  int varid = -1;
  if (nc_inq_varid(file.id(), name.c_str(), &varid) != NC_NOERR) return std::nullopt;
  return var_info(file, varid);
}

namespace {
// A non-owning view of an open dataset (id and path), for the id-based overloads.
struct RawFile {
  int ncid;
  const std::string& name;
  int id() const { return ncid; }
  const std::string& path() const { return name; }
};
std::string var_name(const RawFile& file, int varid) {
  if (varid == NC_GLOBAL) return "";
  char name[NC_MAX_NAME + 1] = {0};
  nc_inq_varname(file.id(), varid, name);
  return name;
}
std::string var_name(const NcFile& file, int varid) {
  if (varid == NC_GLOBAL) return "";
  char name[NC_MAX_NAME + 1] = {0};
  nc_inq_varname(file.id(), varid, name);
  return name;
}
}  // namespace

AttributeList read_attributes(int ncid, const std::string& path, int varid) {
  const RawFile file{ncid, path};
  int count = 0;
  if (varid == NC_GLOBAL)
    check_read(nc_inq_natts(file.id(), &count), file.path(), "", "attributes");
  else
    check_read(nc_inq_varnatts(file.id(), varid, &count), file.path(), var_name(file, varid), "attributes");
  AttributeList out;
  for (int i = 0; i < count; ++i) {
    char name[NC_MAX_NAME + 1] = {0};
    check_read(nc_inq_attname(file.id(), varid, i, name), file.path(), var_name(file, varid), "attribute name");
    nc_type type = NC_NAT;
    std::size_t length = 0;
    check_read(nc_inq_att(file.id(), varid, name, &type, &length), file.path(), var_name(file, varid), name);
    if (type == NC_CHAR) {
      std::string text(length, '\0');
      if (length > 0) check_read(nc_get_att_text(file.id(), varid, name, text.data()), file.path(), var_name(file, varid), name);
      while (!text.empty() && text.back() == '\0') text.pop_back();
      out.push_back({name, text});
    } else if (type == NC_STRING) {
      std::vector<char*> strings(length, nullptr);
      check_read(nc_get_att_string(file.id(), varid, name, strings.data()), file.path(), var_name(file, varid), name);
      std::string text;
      for (std::size_t k = 0; k < length; ++k) text += (k ? " " : "") + std::string(strings[k] ? strings[k] : "");
      nc_free_string(length, strings.data());
      out.push_back({name, text});
    } else {
      std::vector<double> values(length);
      if (length > 0) check_read(nc_get_att_double(file.id(), varid, name, values.data()), file.path(), var_name(file, varid), name);
      out.push_back({name, values});
    }
  }
  return out;
}

AttributeList read_attributes(const NcFile& file, int varid) {
  return read_attributes(file.id(), file.path(), varid);
}

std::optional<std::string> text_attribute(const NcFile& file, int varid, const std::string& name) {
  nc_type type = NC_NAT;
  std::size_t length = 0;
  if (nc_inq_att(file.id(), varid, name.c_str(), &type, &length) != NC_NOERR) return std::nullopt;
  if (type != NC_CHAR && type != NC_STRING) return std::nullopt;
  AttributeList all = read_attributes(file, varid);
  return std::get<std::string>(find_attribute(all, name)->value);
}

std::optional<std::vector<double>> number_attribute(const NcFile& file, int varid, const std::string& name) {
  nc_type type = NC_NAT;
  std::size_t length = 0;
  if (nc_inq_att(file.id(), varid, name.c_str(), &type, &length) != NC_NOERR) return std::nullopt;
  if (type == NC_CHAR || type == NC_STRING || length == 0) return std::nullopt;
  std::vector<double> values(length);
  check_read(nc_get_att_double(file.id(), varid, name.c_str(), values.data()), file.path(), var_name(file, varid), name);
  return values;
}

void write_text(NcFile& file, int varid, const std::string& name, const std::string& value) {
  check(nc_put_att_text(file.id(), varid, name.c_str(), value.size(), value.c_str()), file.path(),
        var_name(file, varid), "cannot write attribute " + name);
}

void write_attributes(int ncid, const std::string& path, int varid, const AttributeList& attributes) {
  const RawFile file{ncid, path};
  for (const auto& attribute : attributes) {
    if (const auto* text = std::get_if<std::string>(&attribute.value)) {
      check(nc_put_att_text(file.id(), varid, attribute.name.c_str(), text->size(), text->c_str()), file.path(),
            var_name(file, varid), "cannot write attribute " + attribute.name);
    } else {
      const auto& values = std::get<std::vector<double>>(attribute.value);
      check(nc_put_att_double(file.id(), varid, attribute.name.c_str(), NC_DOUBLE, values.size(), values.data()),
            file.path(), var_name(file, varid), "cannot write attribute " + attribute.name);
    }
  }
}

void write_attributes(NcFile& file, int varid, const AttributeList& attributes) {
  write_attributes(file.id(), file.path(), varid, attributes);
}

std::vector<double> read_doubles(const NcFile& file, const VarInfo& var) {
  std::size_t size = 1;
  double bytes = 8.0;
  for (auto n : var.shape) {
    size *= n;
    bytes *= static_cast<double>(n);
  }
  check_memory(file.path(), var.name, "reading it", bytes);
  std::vector<double> values(size);
  if (size > 0) check_read(nc_get_var_double(file.id(), var.id, values.data()), file.path(), var.name, "numeric values");
  return values;
}

void read_slab(const NcFile& file, const VarInfo& var, const std::vector<std::size_t>& start,
               const std::vector<std::size_t>& count, double* out) {
  check_read(nc_get_vara_double(file.id(), var.id, start.data(), count.data(), out), file.path(), var.name,
             "numeric values");
}

double Unpacking::operator()(double stored) const {
  if (std::isnan(stored)) return stored;
  for (double m : missing)
    if (stored == m) return std::nan("");
  if (stored < valid_min || stored > valid_max) return std::nan("");
  return stored * scale + offset;
}

Unpacking unpacking_of(const NcFile& file, const VarInfo& var) {
  check_packing_attributes(file.id(), var.id, file.path(), var.name);
  Unpacking u;
  if (auto v = number_attribute(file, var.id, "scale_factor")) u.scale = v->front();
  if (auto v = number_attribute(file, var.id, "add_offset")) u.offset = v->front();
  if (auto v = number_attribute(file, var.id, "_FillValue")) {
    u.missing.push_back(v->front());
  } else {
    switch (var.type) {  // netCDF default fill values mark never-written data
      case NC_BYTE: u.missing.push_back(NC_FILL_BYTE); break;
      case NC_UBYTE: u.missing.push_back(NC_FILL_UBYTE); break;
      case NC_SHORT: u.missing.push_back(NC_FILL_SHORT); break;
      case NC_USHORT: u.missing.push_back(NC_FILL_USHORT); break;
      case NC_INT: u.missing.push_back(NC_FILL_INT); break;
      case NC_FLOAT: u.missing.push_back(static_cast<double>(NC_FILL_FLOAT)); break;
      case NC_DOUBLE: u.missing.push_back(NC_FILL_DOUBLE); break;
      default: break;
    }
  }
  if (auto v = number_attribute(file, var.id, "missing_value")) u.missing.insert(u.missing.end(), v->begin(), v->end());
  if (auto v = number_attribute(file, var.id, "valid_range"); v && v->size() == 2) {
    u.valid_min = (*v)[0];
    u.valid_max = (*v)[1];
  }
  if (auto v = number_attribute(file, var.id, "valid_min")) u.valid_min = v->front();
  if (auto v = number_attribute(file, var.id, "valid_max")) u.valid_max = v->front();
  return u;
}

}  // namespace latentlift::io::detail
