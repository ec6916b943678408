// Internal: RAII owners for PROJ's C handles (PJ_CONTEXT*, PJ*, PROJ_STRING_LIST).
#pragma once

#include <proj.h>

#include <memory>
#include <string>

#include "latentlift/crs.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::geo::detail {

struct ContextDeleter {
  void operator()(PJ_CONTEXT* context) const { proj_context_destroy(context); }
};
using ContextPtr = std::unique_ptr<PJ_CONTEXT, ContextDeleter>;

struct PjDeleter {
  void operator()(PJ* object) const { proj_destroy(object); }
};
using PjPtr = std::unique_ptr<PJ, PjDeleter>;

/// A new PROJ context with networking off (one per thread; never shared).
inline ContextPtr make_context() {
  ContextPtr context(proj_context_create());
  if (!context) throw Error("PROJ: cannot create a context");
  proj_context_set_enable_network(context.get(), 0);
  proj_log_level(context.get(), PJ_LOG_NONE);  // errors are reported by the caller, with context
  return context;
}

/// The message of the context's last error.
inline std::string last_error(PJ_CONTEXT* context) {
  const char* text = proj_context_errno_string(context, proj_context_errno(context));
  return text ? text : "unknown PROJ error";
}

}  // namespace latentlift::geo::detail

namespace latentlift::geo {

/// What a Crs holds: PROJ-readable definitions and derived descriptions (no live PROJ objects).
struct Crs::Impl {
  std::string definition;  // text PROJ parses back into this CRS (WKT2 or PROJ string)
  std::string name, wkt, esri_wkt, proj_string;
  bool geographic = false, rotated = false;
  bool northing_first = false;  // the CRS's first axis points north/south (e.g. EPSG:4326 lat, lon)
  double unit_factor = 1.0;     // metres (projected) or radians (geographic) per axis unit
  AttributeList cf;  // CF grid_mapping parameters (without crs_wkt)
  std::string geodetic_definition;
};

}  // namespace latentlift::geo
