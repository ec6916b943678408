// GRIB grid definitions -> CF grid mappings and coordinates (include/latentlift/grib_grid.hpp).
// Sources: WMO Manual on Codes (WMO-No. 306) Vol. I.2, GRIB2 templates 3.0, 3.1, 3.10, 3.20, 3.30,
// 3.40, flag table 3.4 (scanning mode), code table 3.2 (shape of the earth); CF 1.8 Appendix F.
#include "latentlift/grib_grid.hpp"

#include <cmath>
#include <string>

#include "latentlift/errors.hpp"

namespace latentlift::geo {

namespace {

void add_number(AttributeList& attributes, const std::string& name, std::vector<double> values) {
  attributes.push_back({name, std::move(values)});
}

void add_earth(AttributeList& attributes, const GribGridDefinition& g) {
  if (g.earth_major_m == g.earth_minor_m) {
    add_number(attributes, "earth_radius", {g.earth_major_m});
  } else {
    add_number(attributes, "semi_major_axis", {g.earth_major_m});
    add_number(attributes, "semi_minor_axis", {g.earth_minor_m});
  }
}

/// Evenly spaced values from first to last (n of them); wrap: longitudes continue past 360.
std::vector<double> spaced(double first, double last, long n, bool negative, bool wrap) {
  std::vector<double> out(static_cast<std::size_t>(n));
  if (wrap) {  // longitudes: go the scanning direction round the globe
    if (!negative && last < first) last += 360.0;
    if (negative && last > first) last -= 360.0;
  }
  const double step = n > 1 ? (last - first) / static_cast<double>(n - 1) : 0.0;
  for (long i = 0; i < n; ++i) out[static_cast<std::size_t>(i)] = first + step * static_cast<double>(i);
  return out;
}

/// Name, CF standard_name and units of a coordinate axis.
struct Axis {
  const char* name;
  const char* standard_name;
  const char* units;
};

void name_axes(GribGeometry& out, GribGeometry::Kind kind, Axis y, Axis x) {
  out.kind = kind;
  out.y_name = y.name;
  out.x_name = x.name;
  out.y_standard_name = y.standard_name;
  out.x_standard_name = x.standard_name;
  out.y_units = y.units;
  out.x_units = x.units;
}

void check_size(const GribGridDefinition& g, const std::string& file) {
  if (g.ni <= 0 || g.nj <= 0)
    throw InputError(file, "", "a GRIB grid with rows and columns (" + g.grid_type + " with Ni=" + std::to_string(g.ni) +
                                   ", Nj=" + std::to_string(g.nj) + "; reduced grids are not handled)");
}

}  // namespace

void grib_earth_figure(long shape, double given_major_m, double given_minor_m, double given_radius_m,
                       double& major_m, double& minor_m, const std::string& file) {
  switch (shape) {  // WMO code table 3.2
    case 0: major_m = minor_m = 6367470.0; return;
    case 1: major_m = minor_m = given_radius_m; break;
    case 2: major_m = 6378160.0; minor_m = 6356775.0; return;  // IAU 1965
    case 3: case 7: major_m = given_major_m; minor_m = given_minor_m; break;
    case 4: major_m = 6378137.0; minor_m = 6356752.314140; return;  // IAG-GRS80 (1/f = 298.257222101)
    case 5: major_m = 6378137.0; minor_m = 6356752.314245; return;  // WGS 84 (1/f = 298.257223563)
    case 6: major_m = minor_m = 6371229.0; return;
    case 8: major_m = minor_m = 6371200.0; return;
    case 9: major_m = 6377563.396; minor_m = 6356256.909; return;  // Airy 1830 (OSGB 1936)
    default:
      throw InputError(file, "shapeOfTheEarth", "a shape of the earth of GRIB2 code table 3.2 from 0 to 9 (found " +
                                                    std::to_string(shape) + ")");
  }
  if (!(major_m > 6.0e6 && major_m < 7.0e6 && minor_m > 6.0e6 && minor_m <= major_m))
    throw InputError(file, "shapeOfTheEarth", "an earth radius or axes near 6.37e6 m for shape " + std::to_string(shape));
}

std::size_t grib_point_index(const GribGridDefinition& g, std::size_t k) {
  const std::size_t ni = static_cast<std::size_t>(g.ni), nj = static_cast<std::size_t>(g.nj);
  std::size_t i, j;
  // Rows scanned in alternating directions (flag table 3.4 bit 5) need nothing here: ecCodes
  // returns such values already turned round to the direction of the first row.
  if (g.j_consecutive) {  // flag table 3.4 bit 3: adjacent points along j
    i = k / nj;
    j = k % nj;
  } else {
    j = k / ni;
    i = k % ni;
  }
  return j * ni + i;
}

GribGeometry grib_geometry(const GribGridDefinition& g, const std::string& file) {
  check_size(g, file);
  GribGeometry out;
  const std::string& type = g.grid_type;
  if (type == "regular_ll" || type == "regular_gg") {
    name_axes(out, GribGeometry::Kind::latlon, {"latitude", "latitude", "degrees_north"},
              {"longitude", "longitude", "degrees_east"});
    out.x = spaced(g.lon_first, g.lon_last, g.ni, g.i_negative, true);
    if (type == "regular_gg") {
      if (g.row_latitudes.size() != static_cast<std::size_t>(g.nj))
        throw InputError(file, "", "the latitudes of the " + std::to_string(g.nj) + " rows of the Gaussian grid");
      out.y = g.row_latitudes;
    } else {
      out.y = spaced(g.lat_first, g.lat_last, g.nj, false, false);
    }
    out.grid_mapping.push_back({"grid_mapping_name", std::string("latitude_longitude")});
    add_earth(out.grid_mapping, g);
    return out;
  }
  if (type == "rotated_ll") {
    if (std::fabs(g.rotation_deg) > 1e-9)
      throw InputError(file, "angleOfRotationInDegrees", "a rotated grid with angle of rotation 0 (found " +
                                                             std::to_string(g.rotation_deg) + ")");
    name_axes(out, GribGeometry::Kind::rotated, {"rlat", "grid_latitude", "degrees"}, {"rlon", "grid_longitude", "degrees"});
    out.x = spaced(g.lon_first, g.lon_last, g.ni, g.i_negative, true);
    for (double& lon : out.x)
      if (lon > 180.0) lon -= 360.0;  // grid longitudes about the rotated Greenwich meridian
    out.y = spaced(g.lat_first, g.lat_last, g.nj, false, false);
    // The southern pole of rotation (GRIB) is the antipode of the CF grid north pole.
    out.grid_mapping.push_back({"grid_mapping_name", std::string("rotated_latitude_longitude")});
    add_number(out.grid_mapping, "grid_north_pole_latitude", {-g.south_pole_lat});
    add_number(out.grid_mapping, "grid_north_pole_longitude", {std::remainder(g.south_pole_lon + 180.0, 360.0)});
    add_earth(out.grid_mapping, g);
    return out;
  }
  name_axes(out, GribGeometry::Kind::projected, {"y", "projection_y_coordinate", "m"},
            {"x", "projection_x_coordinate", "m"});
  AttributeList& m = out.grid_mapping;
  if (type == "lambert") {
    m.push_back({"grid_mapping_name", std::string("lambert_conformal_conic")});
    if (g.latin1 == g.latin2)
      add_number(m, "standard_parallel", {g.latin1});
    else
      add_number(m, "standard_parallel", {g.latin1, g.latin2});
    add_number(m, "longitude_of_central_meridian", {g.lov});
    add_number(m, "latitude_of_projection_origin", {g.latin1});
  } else if (type == "polar_stereographic") {
    m.push_back({"grid_mapping_name", std::string("polar_stereographic")});
    add_number(m, "straight_vertical_longitude_from_pole", {g.lov});
    add_number(m, "latitude_of_projection_origin", {g.south_pole ? -90.0 : 90.0});
    add_number(m, "standard_parallel", {g.lad});
  } else if (type == "mercator") {
    m.push_back({"grid_mapping_name", std::string("mercator")});
    add_number(m, "longitude_of_projection_origin", {0.0});
    add_number(m, "standard_parallel", {g.lad});
  } else {
    throw InputError(file, "gridType", "a grid of type regular_ll, regular_gg, rotated_ll, lambert, "
                                       "polar_stereographic or mercator (found '" + type + "')");
  }
  add_number(m, "false_easting", {0.0});
  add_number(m, "false_northing", {0.0});
  add_earth(m, g);
  if (!(g.dx_m > 0 && g.dy_m > 0))
    throw InputError(file, "DxInMetres", "positive grid lengths Dx and Dy of the " + type + " grid");
  // x/y of the first grid point (PROJ), then the grid lengths in the scanning directions.
  const Crs crs = Crs::from_grid_mapping(m, file, "grid definition");
  Transformer to_grid(crs.geodetic(), crs);
  double x0 = g.lon_first, y0 = g.lat_first;
  to_grid.forward(&x0, &y0, 1);
  if (!std::isfinite(x0) || !std::isfinite(y0))
    throw InputError(file, "", "a first grid point that the " + type + " projection can place");
  out.x.resize(static_cast<std::size_t>(g.ni));
  out.y.resize(static_cast<std::size_t>(g.nj));
  for (long i = 0; i < g.ni; ++i) out.x[i] = x0 + (g.i_negative ? -1.0 : 1.0) * g.dx_m * static_cast<double>(i);
  for (long j = 0; j < g.nj; ++j) out.y[j] = y0 + (g.j_positive ? 1.0 : -1.0) * g.dy_m * static_cast<double>(j);
  return out;
}

}  // namespace latentlift::geo
