// Coordinate reference systems: CF grid mappings <-> PROJ CRSs, lat/lon of
// projected grids, coordinate transformations. PROJ stays behind PIMPL.
#pragma once

#include <cstddef>
#include <memory>
#include <string>
#include <variant>
#include <vector>

namespace latentlift::geo {

/// One attribute of a grid_mapping variable: text or numbers (CF 1.8 sec. 5.6).
struct Attribute {
  std::string name;
  std::variant<std::string, std::vector<double>> value;
};
/// The attributes of a grid_mapping variable, in file order.
using AttributeList = std::vector<Attribute>;

/// The attribute called name, or nullptr.
const Attribute* find_attribute(const AttributeList& attributes, const std::string& name);
/// Replaces the attribute called name, or appends it.
void set_attribute(AttributeList& attributes, const std::string& name,
                   std::variant<std::string, std::vector<double>> value);

/// A coordinate reference system (immutable, cheap to copy, safe to share across threads).
class Crs {
 public:
  /// From a CF grid_mapping (CF 1.8 Appendix F, or crs_wkt); InputError(file, variable, ...) if unknown or inconsistent.
  static Crs from_grid_mapping(const AttributeList& attributes, const std::string& file,
                               const std::string& variable);
  /// From user text: "EPSG:4326", a PROJ string ("+proj=utm +zone=33"), WKT or PROJJSON; UsageError if PROJ rejects it.
  static Crs from_user_text(const std::string& text);
  /// WGS 84 longitude/latitude in degrees (EPSG:4326), the CRS of inputs with 1-D lat/lon and no grid_mapping.
  static Crs wgs84();

  /// Longitude/latitude in degrees (also true for rotated-pole CRSs).
  bool is_geographic() const;
  /// A rotated-pole lon/lat (PROJ ob_tran); its coordinates are grid_longitude/grid_latitude in degrees.
  bool is_rotated_pole() const;
  /// The CRS's own unrotated geographic lon/lat CRS (same datum and ellipsoid).
  Crs geodetic() const;
  /// Human-readable name, e.g. "WGS 84 / UTM zone 33N".
  const std::string& name() const;
  /// OGC WKT2:2019 (CF crs_wkt).
  const std::string& wkt() const;
  /// ESRI WKT for a .prj file beside an image; empty when ESRI WKT cannot express this CRS.
  const std::string& esri_wkt() const;
  /// Metres per unit of a projected CRS's x/y (1 for metre-based CRSs); 1 for geographic CRSs.
  double metres_per_unit() const;
  /// PROJ string (+proj=...), for messages and cs2cs.
  const std::string& proj_string() const;
  /// Complete CF grid_mapping: grid_mapping_name and parameters where CF has them, earth figure, crs_wkt.
  AttributeList grid_mapping() const;

  struct Impl;
  explicit Crs(std::shared_ptr<const Impl> impl);
  const Impl& impl() const { return *impl_; }

 private:
  std::shared_ptr<const Impl> impl_;
};

/// Transforms coordinates between two CRSs: degrees lon/lat (lon first) or CRS units (m).
/// Owns one PROJ context: use one Transformer per thread.
class Transformer {
 public:
  Transformer(const Crs& from, const Crs& to);
  ~Transformer();
  Transformer(Transformer&&) noexcept;
  Transformer& operator=(Transformer&&) noexcept;
  Transformer(const Transformer&) = delete;
  Transformer& operator=(const Transformer&) = delete;

  /// In place, n points; points that cannot be transformed become NaN.
  void forward(double* x, double* y, std::size_t n) const;
  /// The inverse direction (to -> from), in place.
  void inverse(double* x, double* y, std::size_t n) const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

/// The input's grid_mapping completed with crs_wkt and the derived CF parameters (input attributes kept).
AttributeList complete_grid_mapping(const AttributeList& attributes, const std::string& file,
                                    const std::string& variable);

/// 2-D latitude/longitude (degrees, row-major [y][x]) of a grid whose 1-D x/y are in the mapping's
/// native units (m for projections, degrees for rotated pole); lat/lon on the mapping's own datum.
struct LatLonGrid {
  std::size_t ny = 0, nx = 0;
  std::vector<double> latitude_deg, longitude_deg;
};
LatLonGrid latlon_of_projected(const AttributeList& attributes, const std::vector<double>& x,
                               const std::vector<double>& y, const std::string& file = "",
                               const std::string& variable = "");

}  // namespace latentlift::geo
