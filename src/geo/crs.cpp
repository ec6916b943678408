// CF grid mappings (CF 1.8 Appendix F) <-> PROJ CRSs, and coordinate transformations.
#include "latentlift/crs.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <optional>

#include "geo/proj_handles.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::geo {

using detail::ContextPtr;
using detail::PjPtr;

const Attribute* find_attribute(const AttributeList& attributes, const std::string& name) {
  for (const auto& attribute : attributes)
    if (attribute.name == name) return &attribute;
  return nullptr;
}

void set_attribute(AttributeList& attributes, const std::string& name,
                   std::variant<std::string, std::vector<double>> value) {
  for (auto& attribute : attributes)
    if (attribute.name == name) {
      attribute.value = std::move(value);
      return;
    }
  attributes.push_back({name, std::move(value)});
}

namespace {

constexpr double kPi = 3.14159265358979323846;

std::string number_text(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

// Reads the numeric parameters of one grid_mapping, naming the file and variable in errors.
class CfReader {
 public:
  CfReader(const AttributeList& attributes, const std::string& file, const std::string& variable)
      : attributes_(attributes), file_(file), variable_(variable) {}

  [[noreturn]] void fail(const std::string& expectation) const {
    throw InputError(file_, variable_, expectation);
  }
  std::optional<std::vector<double>> numbers(const std::string& name) const {
    const Attribute* attribute = find_attribute(attributes_, name);
    if (!attribute) return std::nullopt;
    const auto* values = std::get_if<std::vector<double>>(&attribute->value);
    if (!values || values->empty() || !std::all_of(values->begin(), values->end(),
                                                    [](double v) { return std::isfinite(v); }))
      fail("attribute '" + name + "' must be a finite number");
    return *values;
  }
  std::optional<double> optional(const std::string& name) const {
    auto values = numbers(name);
    if (!values) return std::nullopt;
    if (values->size() != 1) fail("attribute '" + name + "' must be a single number");
    return values->front();
  }
  double required(const std::string& name) const {
    auto value = optional(name);
    if (!value) fail("grid mapping '" + mapping_name() + "' needs attribute '" + name + "'");
    return *value;
  }
  double latitude(const std::string& name) const { return check_latitude(name, required(name)); }
  double check_latitude(const std::string& name, double value) const {
    if (value < -90.0 || value > 90.0) fail("attribute '" + name + "' must be a latitude in [-90, 90] degrees");
    return value;
  }
  double longitude(const std::string& name) const {
    double value = required(name);
    if (value < -360.0 || value > 360.0) fail("attribute '" + name + "' must be a longitude in [-360, 360] degrees");
    return value;
  }
  double false_offset(const std::string& name) const { return optional(name).value_or(0.0); }
  std::string text(const std::string& name) const {
    const Attribute* attribute = find_attribute(attributes_, name);
    if (!attribute) return "";
    const auto* value = std::get_if<std::string>(&attribute->value);
    if (!value) fail("attribute '" + name + "' must be text");
    return *value;
  }
  std::string mapping_name() const { return text("grid_mapping_name"); }

  // Earth figure: earth_radius, or semi_major_axis with inverse_flattening or semi_minor_axis.
  std::string figure() const {
    auto radius = optional("earth_radius");
    auto major = optional("semi_major_axis");
    auto minor = optional("semi_minor_axis");
    auto inverse_flattening = optional("inverse_flattening");
    for (const auto& [name, value] : {std::pair{"earth_radius", radius}, {"semi_major_axis", major},
                                      {"semi_minor_axis", minor}})
      if (value && !(*value > 1e6 && *value < 1e8))
        fail(std::string("attribute '") + name + "' must be the Earth's size in metres");
    std::string text;
    if (radius) {
      bool consistent = (!major || std::fabs(*major - *radius) < 1e-3) &&
                        (!minor || std::fabs(*minor - *radius) < 1e-3) &&
                        (!inverse_flattening || *inverse_flattening == 0.0);
      if (!consistent) fail("earth_radius contradicts semi_major_axis/semi_minor_axis/inverse_flattening");
      text = " +R=" + number_text(*radius);
    } else if (major) {
      if (inverse_flattening && *inverse_flattening != 0.0 && *inverse_flattening < 1.0)
        fail("attribute 'inverse_flattening' must be 0 (sphere) or > 1");
      double minor_from_flattening =
          inverse_flattening ? (*inverse_flattening == 0.0 ? *major : *major * (1.0 - 1.0 / *inverse_flattening))
                             : 0.0;
      if (minor && inverse_flattening && std::fabs(*minor - minor_from_flattening) > 1e-2)
        fail("semi_minor_axis contradicts semi_major_axis and inverse_flattening");
      if (minor && *minor > *major) fail("semi_minor_axis must not exceed semi_major_axis");
      if (inverse_flattening && *inverse_flattening != 0.0)
        text = " +a=" + number_text(*major) + " +rf=" + number_text(*inverse_flattening);
      else if (minor)
        text = " +a=" + number_text(*major) + " +b=" + number_text(*minor);
      else  // semi_major_axis alone, or inverse_flattening 0: a sphere
        text = " +R=" + number_text(*major);
    } else if (minor || inverse_flattening) {
      fail("semi_minor_axis/inverse_flattening given without semi_major_axis");
    } else {
      // CF leaves the figure open; like GDAL, take WGS 84 (common practice).
      text = " +datum=WGS84";
    }
    if (auto prime = optional("longitude_of_prime_meridian"); prime && *prime != 0.0)
      text += " +pm=" + number_text(*prime);
    return text;
  }

 private:
  const AttributeList& attributes_;
  const std::string& file_;
  const std::string& variable_;
};

// The PROJ string of a CF grid_mapping_name and its parameters (CF 1.8 Appendix F;
// PROJ operation parameters as in the PROJ documentation "Projections").
std::string proj_string_of_cf(const CfReader& cf) {
  const std::string name = cf.mapping_name();
  auto offsets = [&] {
    return " +x_0=" + number_text(cf.false_offset("false_easting")) +
           " +y_0=" + number_text(cf.false_offset("false_northing"));
  };
  auto scale = [&](const std::string& attribute) {
    double k = cf.required(attribute);
    if (!(k > 0.0 && k < 10.0)) cf.fail("attribute '" + attribute + "' must be a scale factor in (0, 10)");
    return number_text(k);
  };
  std::string p;
  if (name == "latitude_longitude") {
    p = "+proj=longlat";
  } else if (name == "rotated_latitude_longitude") {
    double pole_lat = cf.latitude("grid_north_pole_latitude");
    double pole_lon = cf.longitude("grid_north_pole_longitude");
    double grid_lon = cf.optional("north_pole_grid_longitude").value_or(0.0);
    double lon_0 = std::remainder(pole_lon + 180.0, 360.0);
    p = "+proj=ob_tran +o_proj=longlat +o_lat_p=" + number_text(pole_lat) + " +o_lon_p=" +
        number_text(grid_lon) + " +lon_0=" + number_text(lon_0);
  } else if (name == "lambert_conformal_conic") {
    auto parallels = cf.numbers("standard_parallel");
    if (!parallels || parallels->empty() || parallels->size() > 2)
      cf.fail("lambert_conformal_conic needs one or two values in 'standard_parallel'");
    for (double v : *parallels) cf.check_latitude("standard_parallel", v);
    double lat_1 = parallels->front(), lat_2 = parallels->back();
    if (std::fabs(lat_1 + lat_2) < 1e-10) cf.fail("standard parallels symmetric about the equator do not define a cone");
    p = "+proj=lcc +lat_1=" + number_text(lat_1) + " +lat_2=" + number_text(lat_2) +
        " +lat_0=" + number_text(cf.latitude("latitude_of_projection_origin")) +
        " +lon_0=" + number_text(cf.longitude("longitude_of_central_meridian")) + offsets();
    if (cf.optional("scale_factor_at_projection_origin"))
      p += " +k_0=" + scale("scale_factor_at_projection_origin");
  } else if (name == "polar_stereographic") {
    double lat_0 = cf.latitude("latitude_of_projection_origin");
    if (std::fabs(std::fabs(lat_0) - 90.0) > 1e-9)
      cf.fail("polar_stereographic needs latitude_of_projection_origin +90 or -90");
    auto vertical = cf.optional("straight_vertical_longitude_from_pole");
    auto origin_lon = cf.optional("longitude_of_projection_origin");
    if (vertical && origin_lon && std::fabs(*vertical - *origin_lon) > 1e-9)
      cf.fail("straight_vertical_longitude_from_pole contradicts longitude_of_projection_origin");
    if (!vertical && !origin_lon) cf.fail("polar_stereographic needs 'straight_vertical_longitude_from_pole'");
    double lon_0 = vertical ? cf.longitude("straight_vertical_longitude_from_pole")
                            : cf.longitude("longitude_of_projection_origin");
    auto parallel = cf.optional("standard_parallel");
    bool has_scale = cf.optional("scale_factor_at_projection_origin").has_value();
    if (parallel && has_scale)
      cf.fail("polar_stereographic takes standard_parallel or scale_factor_at_projection_origin, not both");
    if (!parallel && !has_scale)
      cf.fail("polar_stereographic needs standard_parallel or scale_factor_at_projection_origin");
    p = "+proj=stere +lat_0=" + number_text(lat_0) + " +lon_0=" + number_text(lon_0);
    if (parallel) {
      cf.check_latitude("standard_parallel", *parallel);
      if (*parallel * lat_0 <= 0.0) cf.fail("standard_parallel must lie in the hemisphere of the projection pole");
      p += " +lat_ts=" + number_text(*parallel);
    } else {
      p += " +k_0=" + scale("scale_factor_at_projection_origin");
    }
    p += offsets();
  } else if (name == "mercator") {
    auto parallel = cf.optional("standard_parallel");
    bool has_scale = cf.optional("scale_factor_at_projection_origin").has_value();
    if (parallel && has_scale)
      cf.fail("mercator takes standard_parallel or scale_factor_at_projection_origin, not both");
    if (!parallel && !has_scale) cf.fail("mercator needs standard_parallel or scale_factor_at_projection_origin");
    p = "+proj=merc +lon_0=" + number_text(cf.longitude("longitude_of_projection_origin"));
    if (parallel) {
      if (std::fabs(cf.check_latitude("standard_parallel", *parallel)) >= 89.0)
        cf.fail("mercator standard_parallel must be within 89 degrees of the equator");
      p += " +lat_ts=" + number_text(*parallel);
    } else {
      p += " +k_0=" + scale("scale_factor_at_projection_origin");
    }
    p += offsets();
  } else if (name == "transverse_mercator") {
    p = "+proj=tmerc +lat_0=" + number_text(cf.latitude("latitude_of_projection_origin")) +
        " +lon_0=" + number_text(cf.longitude("longitude_of_central_meridian")) +
        " +k_0=" + scale("scale_factor_at_central_meridian") + offsets();
  } else if (name == "lambert_azimuthal_equal_area") {
    p = "+proj=laea +lat_0=" + number_text(cf.latitude("latitude_of_projection_origin")) +
        " +lon_0=" + number_text(cf.longitude("longitude_of_projection_origin")) + offsets();
  } else {
    cf.fail("unsupported grid_mapping_name '" + name +
            "' (supported: latitude_longitude, rotated_latitude_longitude, lambert_conformal_conic, "
            "polar_stereographic, mercator, transverse_mercator, lambert_azimuthal_equal_area, "
            "or a crs_wkt attribute)");
  }
  p += cf.figure();
  if (name != "latitude_longitude" && name != "rotated_latitude_longitude") p += " +units=m";
  return p + " +no_defs +type=crs";
}

std::string take_string(const char* text) { return text ? text : ""; }

// The value of the operation parameter with this EPSG code, in degrees (angles) or metres (lengths).
std::optional<double> epsg_parameter(PJ_CONTEXT* context, PJ* operation, const char* code) {
  int count = proj_coordoperation_get_param_count(context, operation);
  for (int i = 0; i < count; ++i) {
    const char *name = nullptr, *auth = nullptr, *param_code = nullptr, *value_string = nullptr,
               *unit_name = nullptr, *unit_auth = nullptr, *unit_code = nullptr, *category = nullptr;
    double value = 0.0, factor = 1.0;
    if (!proj_coordoperation_get_param(context, operation, i, &name, &auth, &param_code, &value,
                                       &value_string, &factor, &unit_name, &unit_auth, &unit_code,
                                       &category))
      continue;
    if (!param_code || std::string(param_code) != code) continue;
    std::string kind = take_string(category);
    if (kind == "angular") return value * factor * 180.0 / kPi;
    if (kind == "linear") return value * factor;
    return value * factor;
  }
  return std::nullopt;
}

std::optional<double> named_parameter(PJ_CONTEXT* context, PJ* operation, const std::string& wanted) {
  int count = proj_coordoperation_get_param_count(context, operation);
  for (int i = 0; i < count; ++i) {
    const char *name = nullptr, *auth = nullptr, *code = nullptr, *value_string = nullptr,
               *unit_name = nullptr, *unit_auth = nullptr, *unit_code = nullptr, *category = nullptr;
    double value = 0.0, factor = 1.0;
    if (proj_coordoperation_get_param(context, operation, i, &name, &auth, &code, &value, &value_string,
                                      &factor, &unit_name, &unit_auth, &unit_code, &category) &&
        take_string(name) == wanted)
      return take_string(category) == "angular" ? value * factor * 180.0 / kPi : value * factor;
  }
  return std::nullopt;
}

// CF parameters of a projection method, by EPSG method code (EPSG Guidance Note 7-2).
AttributeList cf_projection(PJ_CONTEXT* context, PJ* operation, const std::string& method_code) {
  struct Map {
    const char* cf_name;
    const char* epsg_code;
  };
  struct Method {
    const char* code;
    const char* grid_mapping_name;
    std::vector<Map> parameters;
  };
  static const std::vector<Method> methods = {
      {"9807", "transverse_mercator",
       {{"latitude_of_projection_origin", "8801"}, {"longitude_of_central_meridian", "8802"},
        {"scale_factor_at_central_meridian", "8805"}, {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"9801", "lambert_conformal_conic",
       {{"standard_parallel", "8801"}, {"latitude_of_projection_origin", "8801"},
        {"longitude_of_central_meridian", "8802"}, {"scale_factor_at_projection_origin", "8805"},
        {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"9802", "lambert_conformal_conic",
       {{"standard_parallel", "8823"}, {"standard_parallel", "8824"}, {"latitude_of_projection_origin", "8821"},
        {"longitude_of_central_meridian", "8822"}, {"false_easting", "8826"}, {"false_northing", "8827"}}},
      {"9804", "mercator",
       {{"longitude_of_projection_origin", "8802"}, {"scale_factor_at_projection_origin", "8805"},
        {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"9805", "mercator",
       {{"standard_parallel", "8823"}, {"longitude_of_projection_origin", "8802"}, {"false_easting", "8806"},
        {"false_northing", "8807"}}},
      {"9810", "polar_stereographic",
       {{"latitude_of_projection_origin", "8801"}, {"straight_vertical_longitude_from_pole", "8802"},
        {"scale_factor_at_projection_origin", "8805"}, {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"9829", "polar_stereographic",
       {{"standard_parallel", "8832"}, {"straight_vertical_longitude_from_pole", "8833"},
        {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"9820", "lambert_azimuthal_equal_area",
       {{"latitude_of_projection_origin", "8801"}, {"longitude_of_projection_origin", "8802"},
        {"false_easting", "8806"}, {"false_northing", "8807"}}},
      {"1027", "lambert_azimuthal_equal_area",
       {{"latitude_of_projection_origin", "8801"}, {"longitude_of_projection_origin", "8802"},
        {"false_easting", "8806"}, {"false_northing", "8807"}}},
  };
  AttributeList out;
  for (const auto& method : methods) {
    if (method_code != method.code) continue;
    out.push_back({"grid_mapping_name", std::string(method.grid_mapping_name)});
    for (const auto& parameter : method.parameters) {
      auto value = epsg_parameter(context, operation, parameter.epsg_code);
      if (!value) return {};  // not expressible in CF: crs_wkt alone
      if (const Attribute* existing = find_attribute(out, parameter.cf_name)) {
        auto values = std::get<std::vector<double>>(existing->value);
        values.push_back(*value);
        set_attribute(out, parameter.cf_name, values);
      } else {
        out.push_back({parameter.cf_name, std::vector<double>{*value}});
      }
    }
    if (method_code == "9829") {  // variant B: the pole follows the sign of the standard parallel
      double parallel = std::get<std::vector<double>>(find_attribute(out, "standard_parallel")->value)[0];
      out.push_back({"latitude_of_projection_origin", std::vector<double>{parallel >= 0 ? 90.0 : -90.0}});
    }
    if (method_code == "9801") {  // CF's 1SP cone has unit scale at the standard parallel
      double k = std::get<std::vector<double>>(find_attribute(out, "scale_factor_at_projection_origin")->value)[0];
      if (std::fabs(k - 1.0) > 1e-12) return {};
      out.erase(std::remove_if(out.begin(), out.end(),
                               [](const Attribute& a) { return a.name == "scale_factor_at_projection_origin"; }),
                out.end());
    }
    return out;
  }
  return {};
}

// Earth figure and prime meridian in CF terms.
void append_figure(PJ_CONTEXT* context, PJ* crs, AttributeList& out) {
  PjPtr ellipsoid(proj_get_ellipsoid(context, crs));
  if (ellipsoid) {
    double a = 0, b = 0, rf = 0;
    int computed = 0;
    if (proj_ellipsoid_get_parameters(context, ellipsoid.get(), &a, &b, &computed, &rf)) {
      if (rf == 0.0 || a == b) {
        out.push_back({"earth_radius", std::vector<double>{a}});
      } else {
        out.push_back({"semi_major_axis", std::vector<double>{a}});
        out.push_back({"semi_minor_axis", std::vector<double>{b}});
        out.push_back({"inverse_flattening", std::vector<double>{rf}});
      }
    }
  }
  PjPtr meridian(proj_get_prime_meridian(context, crs));
  if (meridian) {
    double longitude = 0, factor = 1;
    const char* unit = nullptr;
    if (proj_prime_meridian_get_parameters(context, meridian.get(), &longitude, &factor, &unit))
      out.push_back({"longitude_of_prime_meridian", std::vector<double>{longitude * factor * 180.0 / kPi}});
  }
}

std::shared_ptr<const Crs::Impl> describe(PJ_CONTEXT* context, PJ* input, const std::string& origin) {
  PjPtr crs;
  if (proj_get_type(input) == PJ_TYPE_BOUND_CRS) crs.reset(proj_get_source_crs(context, input));
  PJ* pj = crs ? crs.get() : input;
  PJ_TYPE type = proj_get_type(pj);
  auto impl = std::make_shared<Crs::Impl>();
  impl->geographic = type == PJ_TYPE_GEOGRAPHIC_2D_CRS || type == PJ_TYPE_GEOGRAPHIC_3D_CRS;
  if (!impl->geographic && type != PJ_TYPE_PROJECTED_CRS)
    throw UsageError(origin + ": not a 2-D geographic or projected CRS");
  impl->name = take_string(proj_get_name(pj));
  const char* options[] = {"MULTILINE=NO", nullptr};
  impl->wkt = take_string(proj_as_wkt(context, pj, PJ_WKT2_2019, options));
  if (impl->wkt.empty()) throw UsageError(origin + ": PROJ cannot express this CRS as WKT");
  impl->definition = impl->wkt;
  impl->esri_wkt = take_string(proj_as_wkt(context, pj, PJ_WKT1_ESRI, options));
  impl->proj_string = take_string(proj_as_proj_string(context, pj, PJ_PROJ_4, nullptr));
  PjPtr cs(proj_crs_get_coordinate_system(context, pj));
  if (cs) {
    const char *axis_name = nullptr, *abbreviation = nullptr, *direction = nullptr, *unit = nullptr,
               *unit_auth = nullptr, *unit_code = nullptr;
    double factor = 1;
    if (proj_cs_get_axis_info(context, cs.get(), 0, &axis_name, &abbreviation, &direction, &factor, &unit,
                              &unit_auth, &unit_code)) {
      std::string d = take_string(direction);
      impl->northing_first = d == "north" || d == "south";
      impl->unit_factor = factor;
    }
  }
  PjPtr operation(proj_crs_get_coordoperation(context, pj));  // null unless derived (projected, rotated)
  // The unrotated lon/lat: a derived geographic CRS (rotated pole) is itself geodetic, so take its base.
  PjPtr geodetic(impl->geographic && operation ? proj_get_source_crs(context, pj)
                                               : proj_crs_get_geodetic_crs(context, pj));
  if (!geodetic) throw UsageError(origin + ": CRS has no geodetic base");
  impl->geodetic_definition = take_string(proj_as_wkt(context, geodetic.get(), PJ_WKT2_2019, options));

  std::string method_name, method_code;
  if (operation) {
    const char *name = nullptr, *auth = nullptr, *code = nullptr;
    if (proj_coordoperation_get_method_info(context, operation.get(), &name, &auth, &code)) {
      method_name = take_string(name);
      method_code = take_string(code);
    }
  }
  impl->rotated = impl->geographic && method_name.find("ob_tran") != std::string::npos;
  if (impl->geographic && !operation) {
    impl->cf.push_back({"grid_mapping_name", std::string("latitude_longitude")});
  } else if (impl->rotated && method_name.find("o_proj=longlat") != std::string::npos) {
    auto pole_lat = named_parameter(context, operation.get(), "o_lat_p");
    auto grid_lon = named_parameter(context, operation.get(), "o_lon_p");
    auto lon_0 = named_parameter(context, operation.get(), "lon_0");
    if (pole_lat && lon_0) {
      impl->cf.push_back({"grid_mapping_name", std::string("rotated_latitude_longitude")});
      impl->cf.push_back({"grid_north_pole_latitude", std::vector<double>{*pole_lat}});
      impl->cf.push_back({"grid_north_pole_longitude", std::vector<double>{std::remainder(*lon_0 - 180.0, 360.0)}});
      impl->cf.push_back({"north_pole_grid_longitude", std::vector<double>{grid_lon.value_or(0.0)}});
    }
  } else if (operation) {
    impl->cf = cf_projection(context, operation.get(), method_code);
  }
  if (!impl->cf.empty()) append_figure(context, pj, impl->cf);
  if (!impl->name.empty() && impl->name != "unknown" && impl->name != "unnamed")
    impl->cf.push_back({impl->geographic && !impl->rotated ? "geographic_crs_name" : "projected_crs_name",
                        impl->name});
  return impl;
}

PjPtr create(PJ_CONTEXT* context, const std::string& definition) {
  return PjPtr(proj_create(context, definition.c_str()));
}

// Native coordinates of a few points transformed through `a` to lon/lat and back through `b`
// (each on its own datum): the largest disagreement, in native units.
double disagreement(const Crs& a, const Crs& b, const std::vector<std::pair<double, double>>& points) {
  Transformer to_geo(a, a.geodetic()), from_geo(b.geodetic(), b);
  double worst = 0.0;
  for (auto [x0, y0] : points) {
    double x = x0, y = y0;
    to_geo.forward(&x, &y, 1);
    from_geo.forward(&x, &y, 1);
    double dx = x - x0;
    if (a.is_geographic()) dx = std::remainder(dx, 360.0);
    double d = std::hypot(dx, y - y0);
    worst = std::max(worst, std::isfinite(d) ? d : HUGE_VAL);
  }
  return worst;
}

}  // namespace

Crs::Crs(std::shared_ptr<const Impl> impl) : impl_(std::move(impl)) {}

Crs Crs::from_grid_mapping(const AttributeList& attributes, const std::string& file,
                           const std::string& variable) {
  CfReader cf(attributes, file, variable);
  const std::string wkt = cf.text("crs_wkt");
  const std::string name = cf.mapping_name();
  if (name.empty() && wkt.empty()) cf.fail("a grid mapping needs grid_mapping_name or crs_wkt");
  ContextPtr context = detail::make_context();
  std::optional<Crs> from_cf, from_wkt;
  if (!name.empty()) {
    std::string definition = proj_string_of_cf(cf);
    PjPtr pj = create(context.get(), definition);
    if (!pj) cf.fail("PROJ rejects the mapping (" + detail::last_error(context.get()) + "): " + definition);
    try {
      from_cf = Crs(describe(context.get(), pj.get(), definition));
    } catch (const UsageError& e) {
      cf.fail(e.what());
    }
  }
  if (!wkt.empty()) {
    PjPtr pj = create(context.get(), wkt);
    if (!pj || !proj_is_crs(pj.get())) cf.fail("crs_wkt is not a CRS PROJ can read");
    try {
      from_wkt = Crs(describe(context.get(), pj.get(), "crs_wkt"));
    } catch (const UsageError& e) {
      cf.fail(e.what());
    }
  }
  if (from_cf && from_wkt) {
    if (from_cf->is_geographic() != from_wkt->is_geographic() ||
        from_cf->is_rotated_pole() != from_wkt->is_rotated_pole())
      cf.fail("crs_wkt and grid_mapping_name describe different kinds of CRS");
    // Native points near the false origin: projected metres or lon/lat degrees.
    double x0 = cf.false_offset("false_easting"), y0 = cf.false_offset("false_northing");
    std::vector<std::pair<double, double>> points;
    if (from_cf->is_geographic())
      points = {{0.0, 0.0}, {10.0, 45.0}, {-20.0, -30.0}};
    else
      points = {{x0, y0}, {x0 + 2e5, y0 + 1e5}, {x0 - 1e5, y0 - 3e5}};
    double tolerance = from_cf->is_geographic() ? 1e-6 : 0.01;  // degrees or metres
    if (!(disagreement(*from_cf, *from_wkt, points) <= tolerance))
      cf.fail("crs_wkt contradicts the CF grid mapping parameters (" + from_cf->proj_string() + ")");
  }
  return from_wkt ? *from_wkt : *from_cf;
}

Crs Crs::from_user_text(const std::string& text) {
  ContextPtr context = detail::make_context();
  std::string definition = text;
  if (text.rfind("+proj=", 0) == 0 || text.rfind("proj=", 0) == 0) {
    if (text.find("type=crs") == std::string::npos) definition += " +type=crs";
  }
  PjPtr pj = create(context.get(), definition);
  if (!pj || !proj_is_crs(pj.get()))
    throw UsageError("CRS '" + text + "' is not one PROJ knows (" + detail::last_error(context.get()) + ")");
  return Crs(describe(context.get(), pj.get(), "CRS '" + text + "'"));
}

Crs Crs::wgs84() {
  static const Crs crs = from_user_text("EPSG:4326");
  return crs;
}

bool Crs::is_geographic() const { return impl_->geographic; }
bool Crs::is_rotated_pole() const { return impl_->rotated; }
const std::string& Crs::name() const { return impl_->name; }
const std::string& Crs::wkt() const { return impl_->wkt; }
const std::string& Crs::esri_wkt() const { return impl_->esri_wkt; }
const std::string& Crs::proj_string() const { return impl_->proj_string; }
double Crs::metres_per_unit() const { return impl_->geographic ? 1.0 : impl_->unit_factor; }

Crs Crs::geodetic() const {
  ContextPtr context = detail::make_context();
  PjPtr pj = create(context.get(), impl_->geodetic_definition);
  if (!pj) throw Error("PROJ cannot read back the geodetic CRS of " + impl_->name);
  return Crs(describe(context.get(), pj.get(), impl_->name));
}

AttributeList Crs::grid_mapping() const {
  AttributeList out = impl_->cf;
  out.push_back({"crs_wkt", impl_->wkt});
  return out;
}

struct Transformer::Impl {
  ContextPtr context;  // declared first: destroyed after the operation
  PjPtr operation;
};

Transformer::Transformer(const Crs& from, const Crs& to) : impl_(std::make_unique<Impl>()) {
  impl_->context = detail::make_context();
  PJ_CONTEXT* context = impl_->context.get();
  PjPtr source = create(context, from.impl().definition);
  PjPtr target = create(context, to.impl().definition);
  if (!source || !target) throw Error("PROJ cannot read back a CRS: " + detail::last_error(context));
  PjPtr operation(proj_create_crs_to_crs_from_pj(context, source.get(), target.get(), nullptr, nullptr));
  if (!operation)
    throw UsageError("no transformation from " + from.name() + " to " + to.name() + ": " +
                     detail::last_error(context));
  impl_->operation.reset(proj_normalize_for_visualization(context, operation.get()));
  if (!impl_->operation) throw Error("PROJ: cannot normalise axis order: " + detail::last_error(context));
}

Transformer::~Transformer() = default;
Transformer::Transformer(Transformer&&) noexcept = default;
Transformer& Transformer::operator=(Transformer&&) noexcept = default;

namespace {
void run(PJ* operation, PJ_DIRECTION direction, double* x, double* y, std::size_t n) {
  if (n == 0) return;
  proj_trans_generic(operation, direction, x, sizeof(double), n, y, sizeof(double), n, nullptr, 0, 0,
                     nullptr, 0, 0);
  for (std::size_t i = 0; i < n; ++i)
    if (!std::isfinite(x[i]) || !std::isfinite(y[i]) || std::fabs(x[i]) > 1e30 || std::fabs(y[i]) > 1e30)
      x[i] = y[i] = std::nan("");
}
}  // namespace

void Transformer::forward(double* x, double* y, std::size_t n) const {
  run(impl_->operation.get(), PJ_FWD, x, y, n);
}
void Transformer::inverse(double* x, double* y, std::size_t n) const {
  run(impl_->operation.get(), PJ_INV, x, y, n);
}

AttributeList complete_grid_mapping(const AttributeList& attributes, const std::string& file,
                                    const std::string& variable) {
  Crs crs = Crs::from_grid_mapping(attributes, file, variable);
  AttributeList out = attributes;
  for (const auto& attribute : crs.grid_mapping())
    if (!find_attribute(out, attribute.name)) out.push_back(attribute);
  return out;
}

LatLonGrid latlon_of_projected(const AttributeList& attributes, const std::vector<double>& x,
                               const std::vector<double>& y, const std::string& file,
                               const std::string& variable) {
  Crs crs = Crs::from_grid_mapping(attributes, file, variable);
  Transformer to_geo(crs, crs.geodetic());
  LatLonGrid grid;
  grid.ny = y.size();
  grid.nx = x.size();
  grid.longitude_deg.resize(grid.ny * grid.nx);
  grid.latitude_deg.resize(grid.ny * grid.nx);
  for (std::size_t j = 0; j < grid.ny; ++j)
    for (std::size_t i = 0; i < grid.nx; ++i) {
      grid.longitude_deg[j * grid.nx + i] = x[i];
      grid.latitude_deg[j * grid.nx + i] = y[j];
    }
  to_geo.forward(grid.longitude_deg.data(), grid.latitude_deg.data(), grid.longitude_deg.size());
  return grid;
}

}  // namespace latentlift::geo
