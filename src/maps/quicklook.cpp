// latentlift quicklook: a PNG map of one field for people: the field in the grid's own projection,
// GSHHG coastlines and borders projected with PROJ, a labelled graticule, title, colour bar with
// pointed ends where values lie beyond it (or a class legend), and legend entries for missing and
// not-applicable cells. Text in DejaVu Sans through cairo; every position follows measured text.
#include "latentlift/quicklook.hpp"

#include <algorithm>
#include <cmath>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <sstream>

#include "maps/canvas.hpp"
#include "maps/cf_time_text.hpp"
#include "maps/colour_scale.hpp"
#include "io/netcdf_file.hpp"
#include "io/temporary_output.hpp"
#include "maps/png_image.hpp"
#include "geo/proj_handles.hpp"
#include "maps/resample.hpp"
#include "maps/shorelines.hpp"
#include "maps/source_grid.hpp"
#include "io/temporary_output.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps {

namespace {

using namespace latentlift::maps::detail;
using namespace io::detail;
using geo::Attribute;
using geo::Crs;
using geo::Transformer;
using geo::find_attribute;

const Rgb kWhite{255, 255, 255}, kInk{28, 28, 32}, kSoftInk{84, 84, 92}, kFrame{60, 60, 66};
const Rgb kCoast{22, 22, 26}, kBorder{70, 60, 60}, kGraticule{255, 255, 255};

// Type sizes (pixels) and spacing of the layout.
constexpr double kTitlePx = 17, kTextPx = 12, kSmallPx = 10.5, kPad = 14, kGap = 8;

std::string format_value(double v) {
  char text[32];
  if (v != 0 && (std::fabs(v) >= 1e6 || std::fabs(v) < 1e-3))
    std::snprintf(text, sizeof text, "%.3g", v);
  else
    std::snprintf(text, sizeof text, "%.6g", std::fabs(v) < 1e-12 ? 0.0 : v);
  return text;
}

// Splits text into lines no wider than width_px in the given type size (long words are cut).
std::vector<std::string> wrap(const std::string& text, double width_px, double size_px) {
  std::vector<std::string> lines;
  std::istringstream words(text);
  std::string line;
  auto fits = [&](const std::string& s) { return Canvas::measure(s, size_px).width <= width_px; };
  for (std::string word; words >> word;) {
    std::string candidate = line.empty() ? word : line + " " + word;
    if (fits(candidate)) {
      line = candidate;
      continue;
    }
    if (!line.empty()) lines.push_back(line);
    line.clear();
    while (!fits(word) && word.size() > 1) {  // a word wider than the line: cut it
      std::size_t n = word.size() - 1;
      while (n > 1 && !fits(word.substr(0, n))) --n;
      lines.push_back(word.substr(0, n));
      word = word.substr(n);
    }
    line = word;
  }
  if (!line.empty()) lines.push_back(line);
  return lines;
}

std::vector<std::string> split(const std::string& text) {
  std::istringstream in(text);
  std::vector<std::string> out;
  for (std::string word; in >> word;) out.push_back(word);
  return out;
}

struct Raster {
  std::size_t nx = 0, ny = 0;            // columns west->east, rows north->south
  std::vector<double> values;            // row-major, row 0 north
  std::vector<double> reference;         // the analysed-column marker per cell (NaN: not analysed), or empty
  std::optional<Crs> crs;
  double west = 0, north = 0, dx = 0, dy = 0;  // outer edges and cell size (dy > 0), CRS units
  bool regular = false;
};

std::vector<double> flip_rectilinear(const SourceGrid& grid, const std::vector<double>& slice) {
  std::size_t nx = grid.x.size(), ny = grid.y.size();
  std::vector<double> out(nx * ny);
  bool x_up = nx < 2 || grid.x[1] > grid.x[0], y_up = ny < 2 || grid.y[1] > grid.y[0];
  for (std::size_t j = 0; j < ny; ++j)
    for (std::size_t i = 0; i < nx; ++i) {
      std::size_t col = x_up ? i : nx - 1 - i, row = y_up ? ny - 1 - j : j;
      out[row * nx + col] = slice[j * nx + i];
    }
  return out;
}

Raster raster_of_rectilinear(const SourceGrid& grid, const std::vector<double>& slice, const std::vector<double>* reference) {
  Raster r;
  r.nx = grid.x.size();
  r.ny = grid.y.size();
  r.values = flip_rectilinear(grid, slice);
  if (reference) r.reference = flip_rectilinear(grid, *reference);
  r.crs = grid.crs;
  // Cell edges half way between centres; an irregular axis is drawn with its mean spacing.
  r.dx = r.nx > 1 ? std::fabs(grid.x.back() - grid.x.front()) / static_cast<double>(r.nx - 1) : 1.0;
  r.dy = r.ny > 1 ? std::fabs(grid.y.back() - grid.y.front()) / static_cast<double>(r.ny - 1) : 1.0;
  r.west = std::min(grid.x.front(), grid.x.back()) - 0.5 * r.dx;
  r.north = std::max(grid.y.front(), grid.y.back()) + 0.5 * r.dy;
  r.regular = grid.regular();
  return r;
}

// Cells with lat/lon each: drawn on a lon/lat grid (about four pixels of grid per cell) by nearest cell.
Raster raster_of_points(const SourceGrid& grid, const std::vector<double>& slice, const std::vector<double>* reference) {
  double west = HUGE_VAL, east = -HUGE_VAL, south = HUGE_VAL, north = -HUGE_VAL;
  for (std::size_t k = 0; k < grid.lon.size(); ++k) {
    if (std::isnan(grid.lon[k]) || std::isnan(grid.lat[k])) continue;
    west = std::min(west, grid.lon[k]);
    east = std::max(east, grid.lon[k]);
    south = std::min(south, grid.lat[k]);
    north = std::max(north, grid.lat[k]);
  }
  if (!(east >= west)) throw InputError("", "", "cells with valid latitude/longitude");
  double area = std::max((east - west) * (north - south), 1e-6);
  double resolution = std::sqrt(area / (4.0 * static_cast<double>(grid.lon.size())));
  std::array<double, 4> bbox = {west - resolution, south - resolution, east + resolution, north + resolution};
  TargetGrid target = make_target_grid(grid, *grid.crs, resolution, bbox);
  ResamplePlan plan(grid, target, false);
  auto resample = [&](const std::vector<double>& in) {
    std::vector<double> values, out(target.nx * target.ny);
    plan.nearest(in, values);
    for (std::size_t j = 0; j < target.ny; ++j)
      for (std::size_t i = 0; i < target.nx; ++i) out[(target.ny - 1 - j) * target.nx + i] = values[j * target.nx + i];
    return out;
  };
  Raster r;
  r.nx = target.nx;
  r.ny = target.ny;
  r.values = resample(slice);
  if (reference) r.reference = resample(*reference);
  r.crs = grid.crs;
  r.west = target.west;
  r.north = target.north();
  r.dx = r.dy = resolution;
  r.regular = true;
  return r;
}

// --- map geometry: lon/lat <-> map pixels ---

class MapProjection {
 public:
  MapProjection(const Raster& raster, int s)
      : raster_(raster), s_(s), to_map_(raster.crs->geodetic(), *raster.crs), geographic_(raster.crs->is_geographic()) {}

  // Pixel position (relative to the map's top-left corner) of lon/lat points; NaN where PROJ cannot
  // place them. On geographic grids longitudes are taken in the grid's own 360-degree window.
  std::vector<Point> pixels(const LonLatLine& line) const {
    std::vector<double> x(line.size()), y(line.size());
    for (std::size_t k = 0; k < line.size(); ++k) {
      x[k] = line[k][0];
      y[k] = line[k][1];
    }
    to_map_.forward(x.data(), y.data(), x.size());
    std::vector<Point> out(line.size());
    for (std::size_t k = 0; k < line.size(); ++k) {
      double X = x[k];
      if (geographic_ && std::isfinite(X)) X = raster_.west + std::fmod(std::fmod(X - raster_.west, 360.0) + 360.0, 360.0);
      out[k] = {(X - raster_.west) / raster_.dx * s_, (raster_.north - y[k]) / raster_.dy * s_};
    }
    return out;
  }

  // lon/lat of map pixels (relative positions), NaN outside the projection.
  void lonlat(std::vector<double>& px, std::vector<double>& py) const {
    for (std::size_t k = 0; k < px.size(); ++k) {
      px[k] = raster_.west + px[k] / s_ * raster_.dx;
      py[k] = raster_.north - py[k] / s_ * raster_.dy;
    }
    to_map_.inverse(px.data(), py.data(), px.size());
  }

 private:
  const Raster& raster_;
  int s_;
  Transformer to_map_;
  bool geographic_;
};

// Splits a projected polyline where points are missing or where it jumps across the map (a
// wrap-around at the date line or a projection's cut): such segments are not drawn.
std::vector<std::vector<Point>> pieces(const std::vector<Point>& points, double jump_px) {
  std::vector<std::vector<Point>> out(1);
  for (const Point& p : points) {
    bool bad = !std::isfinite(p[0]) || !std::isfinite(p[1]);
    if (!bad && !out.back().empty()) {
      const Point& q = out.back().back();
      if (std::hypot(p[0] - q[0], p[1] - q[1]) > jump_px) out.emplace_back();
    }
    if (bad) {
      if (!out.back().empty()) out.emplace_back();
      continue;
    }
    out.back().push_back(p);
  }
  out.erase(std::remove_if(out.begin(), out.end(), [](const auto& p) { return p.size() < 2; }), out.end());
  return out;
}

struct LonLatBox {
  double west = -180, east = 180, south = -90, north = 90;
};

// The lon/lat extent of the map, from a 65 x 65 sample of map pixels (plus a margin).
LonLatBox lonlat_extent(const MapProjection& projection, int map_w, int map_h) {
  const int n = 65;
  std::vector<double> px, py;
  for (int j = 0; j < n; ++j)
    for (int i = 0; i < n; ++i) {
      px.push_back(map_w * i / (n - 1.0));
      py.push_back(map_h * j / (n - 1.0));
    }
  projection.lonlat(px, py);
  double centre_lon = px[(n / 2) * n + n / 2];
  if (!std::isfinite(centre_lon)) centre_lon = 0;
  LonLatBox box{HUGE_VAL, -HUGE_VAL, HUGE_VAL, -HUGE_VAL};
  bool any_missing = false;
  for (std::size_t k = 0; k < px.size(); ++k) {
    if (!std::isfinite(px[k]) || !std::isfinite(py[k])) {
      any_missing = true;
      continue;
    }
    double lon = centre_lon + std::remainder(px[k] - centre_lon, 360.0);
    box.west = std::min(box.west, lon);
    box.east = std::max(box.east, lon);
    box.south = std::min(box.south, py[k]);
    box.north = std::max(box.north, py[k]);
  }
  if (!(box.east >= box.west)) return LonLatBox{};
  double margin = std::max(1.0, 0.05 * std::max(box.east - box.west, box.north - box.south));
  box.west -= margin;
  box.east += margin;
  box.south = std::max(-90.0, box.south - margin);
  box.north = std::min(90.0, box.north + margin);
  if (any_missing || box.east - box.west >= 300.0 || box.north >= 89.0 || box.south <= -89.0) {
    // A pole, the whole globe or the edge of the projection on the map: every longitude.
    box.west = centre_lon - 180.0;
    box.east = centre_lon + 180.0;
    if (any_missing) box.south = -90.0, box.north = 90.0;
  }
  return box;
}

double graticule_step(const LonLatBox& box) {
  double span = std::max(box.east - box.west, 2.0 * (box.north - box.south));
  for (double step : {0.5, 1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 45.0, 60.0})
    if (span / step <= 12.0) return step;
  return 90.0;
}

std::string degrees_label(double value, bool longitude) {
  double v = longitude ? std::remainder(value, 360.0) : value;
  if (std::fabs(v) < 1e-9) v = 0;
  char number[32];
  double a = std::fabs(v);
  std::snprintf(number, sizeof number, a == std::floor(a) ? "%.0f" : "%.1f", a);
  std::string text = std::string(number) + "\u00b0";
  if (v == 0 || (longitude && std::fabs(a - 180.0) < 1e-9)) return text;
  return text + (longitude ? (v > 0 ? "E" : "W") : (v > 0 ? "N" : "S"));
}

struct EdgeLabel {
  enum Edge { left, right, top, bottom } edge;
  double position;  // along the edge, pixels from the map's top-left corner
  std::string text;
};

// Where a polyline (map pixels) first crosses an edge of the map rectangle.
std::optional<double> crossing(const std::vector<Point>& line, EdgeLabel::Edge edge, double w, double h) {
  for (std::size_t k = 1; k < line.size(); ++k) {
    const Point &a = line[k - 1], &b = line[k];
    bool vertical = edge == EdgeLabel::left || edge == EdgeLabel::right;
    double c = edge == EdgeLabel::left ? 0 : edge == EdgeLabel::right ? w : edge == EdgeLabel::top ? 0 : h;
    double a0 = vertical ? a[0] : a[1], b0 = vertical ? b[0] : b[1];
    if ((a0 - c) * (b0 - c) > 0 || a0 == b0) continue;
    double f = (c - a0) / (b0 - a0);
    double along = vertical ? a[1] + f * (b[1] - a[1]) : a[0] + f * (b[0] - a[0]);
    if (along >= 0 && along <= (vertical ? h : w)) return along;
  }
  return std::nullopt;
}

// --- climatology groups ---

struct Group {
  std::size_t index = 0;
  std::string label;
};

Group choose_group(const NcFile& file, const std::string& input, const std::string& dim, std::size_t length,
                   const std::string& wanted) {
  std::vector<std::string> labels;
  if (auto var = find_variable(file, "group_label"); var && var->type == NC_STRING && var->dim_names == std::vector<std::string>{dim}) {
    std::vector<char*> text(length, nullptr);
    check(nc_get_var_string(file.id(), var->id, text.data()), input, "group_label", "read");
    for (char* t : text) labels.emplace_back(t ? t : "");
    nc_free_string(text.size(), text.data());
  }
  Group g;
  if (wanted.empty()) {
    g.index = 0;
  } else if (std::all_of(wanted.begin(), wanted.end(), [](char c) { return std::isdigit(static_cast<unsigned char>(c)); })) {
    g.index = std::stoul(wanted);
    if (g.index >= length)
      throw UsageError("--group " + wanted + " is beyond the " + std::to_string(length) + " groups of " + input);
  } else {
    auto lower = [](std::string s) {
      for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
      return s;
    };
    auto it = std::find_if(labels.begin(), labels.end(), [&](const std::string& l) { return lower(l) == lower(wanted); });
    if (it == labels.end()) {
      std::string known;
      for (const auto& l : labels) known += (known.empty() ? "" : ", ") + l;
      throw UsageError("--group " + wanted + " is not a group of " + input + " (groups: " +
                       (known.empty() ? "none labelled; give an index" : known) + ")");
    }
    g.index = static_cast<std::size_t>(it - labels.begin());
  }
  g.label = g.index < labels.size() ? labels[g.index] : "group " + std::to_string(g.index);
  return g;
}

// The variable that tells analysed columns from missing ones on this file, when there is one:
// latent_class (analyze/reproject outputs: defined wherever a column was analysed) or count
// (climatologies: time steps analysed). Empty for the field itself.
std::optional<VarInfo> analysed_marker(const NcFile& file, const VarInfo& field) {
  for (const char* name : {"latent_class", "count"}) {
    if (field.name == name) continue;
    auto var = find_variable(file, name);
    if (var && var->dim_names == field.dim_names) return var;
  }
  return std::nullopt;
}

/// Edit distance (Levenshtein 1966) between two names.
std::size_t edit_distance(const std::string& a, const std::string& b) {
  std::vector<std::size_t> row(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    std::size_t diagonal = row[0];
    row[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t up = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diagonal = up;
    }
  }
  return row[b.size()];
}

/// The fields of the file (variables on two or more dimensions), closest to `name` first.
std::string closest_fields(const io::detail::NcFile& file, const std::string& name) {
  std::vector<std::pair<std::size_t, std::string>> ranked;
  for (const auto& v : io::detail::all_variables(file))
    if (v.dim_names.size() >= 2 && v.type != NC_CHAR) ranked.push_back({edit_distance(name, v.name), v.name});
  std::stable_sort(ranked.begin(), ranked.end(),
                   [](const auto& x, const auto& y) { return x.first < y.first; });
  std::string text;
  for (const auto& [distance, field] : ranked) text += (text.empty() ? "" : ", ") + field;
  return text.empty() ? "no fields" : text + " (closest first)";
}

}  // namespace

QuicklookSummary quicklook_file(const std::string& input, const std::string& png_path, const QuicklookOptions& options) {
  namespace fs = std::filesystem;
  io::detail::TemporaryOutput::check_target(png_path, options.overwrite);  // before any work
  NcFile file = NcFile::open_read(input);
  auto var = find_variable(file, options.field);
  if (!var) throw InputError(input, options.field, "a field of this name; the file has " + closest_fields(file, options.field));
  SourceGrid grid = grid_of(file, *var);
  QuicklookSummary summary;

  // Leading indices: time takes --time, a climatology's group dimension --group, levels --level.
  std::size_t lead = var->dim_names.size() - grid.dims.size();
  std::vector<std::size_t> index(lead, 0);
  std::string valid_time, level_text;
  bool has_time = false, has_group = false;
  for (std::size_t k = 0; k < lead; ++k) {
    const std::string& dim = var->dim_names[k];
    auto coordinate = find_variable(file, dim);
    std::string units = coordinate ? text_attribute(file, coordinate->id, "units").value_or("") : "";
    if (dim == "group") {
      Group g = choose_group(file, input, dim, var->shape[k], options.group);
      index[k] = g.index;
      summary.group = g.label;
      has_group = true;
      continue;
    }
    bool is_time = units.find(" since ") != std::string::npos || dim == "time";
    std::size_t wanted = is_time ? options.time_index : options.level_index;
    if (wanted >= var->shape[k])
      throw UsageError(std::string(is_time ? "--time " : "--level ") + std::to_string(wanted) + " is beyond the " +
                       std::to_string(var->shape[k]) + " steps of dimension '" + dim + "' in " + input);
    index[k] = wanted;
    std::optional<double> value;
    if (coordinate && coordinate->dim_names.size() == 1) value = read_doubles(file, *coordinate).at(wanted);
    if (is_time) {
      has_time = true;
      std::string calendar = coordinate ? text_attribute(file, coordinate->id, "calendar").value_or("") : "";
      valid_time = value ? format_time(*value, units, calendar) : "time index " + std::to_string(wanted);
    } else {
      level_text += ", " + dim + " " + (value ? format_value(*value) + (units.empty() ? "" : " " + units) : std::to_string(wanted));
    }
  }
  if (!has_time && options.time_index != 0) throw UsageError("--time given but " + options.field + " has no time dimension");
  if (!has_group && !options.group.empty())
    throw UsageError("--group given but " + options.field + " in " + input + " has no group dimension (not a climatology)");

  std::vector<double> slice = read_slice(file, *var, grid, index);
  std::optional<std::vector<double>> reference;
  if (auto marker = analysed_marker(file, *var)) {
    reference = read_slice(file, *marker, grid, index);
    if (marker->name == "count")
      for (double& v : *reference)
        if (!(v > 0)) v = std::nan("");
  }
  Raster raster = grid.kind == SourceGrid::Kind::rectilinear ? raster_of_rectilinear(grid, slice, reference ? &*reference : nullptr)
                                                             : raster_of_points(grid, slice, reference ? &*reference : nullptr);
  if (!raster.crs) raster.crs = Crs::wgs84();

  // Colours.
  summary.valid_time = has_group ? "group " + summary.group : valid_time.empty() ? "no time dimension" : valid_time;
  summary.classes = is_class_field(file, *var);
  std::vector<double> class_values;
  std::vector<std::string> class_names;
  ColourBins bins;
  std::vector<Rgb> steps;
  Rgb below_colour{}, above_colour{};
  if (summary.classes) {
    auto values = number_attribute(file, var->id, "flag_values");
    class_names = split(text_attribute(file, var->id, "flag_meanings").value_or(""));
    if (values) class_values = *values;
    if (class_values.empty()) {  // classes without flag_values: the distinct values present
      for (double v : raster.values)
        if (!std::isnan(v) && std::find(class_values.begin(), class_values.end(), v) == class_values.end())
          class_values.push_back(v);
      std::sort(class_values.begin(), class_values.end());
    }
    if (!class_names.empty() && class_names.size() != class_values.size())
      throw InputError(input, options.field, "as many flag_meanings as flag_values");
    while (class_names.size() < class_values.size()) class_names.push_back(format_value(class_values[class_names.size()]));
  } else {
    double lo = HUGE_VAL, hi = -HUGE_VAL;
    for (double v : raster.values)
      if (!std::isnan(v)) lo = std::min(lo, v), hi = std::max(hi, v);
    double from = percentile(raster.values, 2.0), to = percentile(raster.values, 98.0);
    if (options.range) from = (*options.range)[0], to = (*options.range)[1];
    if (options.range && !(to > from)) throw UsageError("--range needs MIN < MAX");
    if (!(from <= to)) from = 0, to = 1;  // all missing: an empty map
    bins = options.range ? nice_bins(from, to) : nice_bins(from, to, 12);
    if (options.range && (std::fabs(bins.low - from) > 1e-9 * bins.step || std::fabs(bins.high() - to) > 1e-9 * bins.step)) {
      // --range is kept exactly: at most 16 equal bins between the given ends.
      int count = std::max(1, static_cast<int>(std::lround((to - from) / bins.step)));
      bins = {from, (to - from) / count, count};
    }
    summary.below_range = lo < bins.low - 1e-9 * bins.step;
    summary.above_range = hi > bins.high() + 1e-9 * bins.step;
    // Beyond-range colours continue the scale at both ends (pointed ends of the bar).
    int extra_low = summary.below_range ? 1 : 0, extra_high = summary.above_range ? 1 : 0;
    std::vector<Rgb> all = sequential_steps(bins.count + extra_low + extra_high);
    if (extra_low) below_colour = all.front();
    if (extra_high) above_colour = all.back();
    steps.assign(all.begin() + extra_low, all.end() - extra_high);
    summary.low = bins.low;
    summary.step = bins.step;
    summary.bins = bins.count;
  }
  auto colour_of = [&](double v) -> std::optional<Rgb> {
    if (std::isnan(v)) return std::nullopt;
    if (summary.classes) {
      for (std::size_t k = 0; k < class_values.size(); ++k)
        if (class_values[k] == v) return category_colour(static_cast<int>(k));
      return std::nullopt;  // not a declared class: shown as missing
    }
    if (v < bins.low && summary.below_range) return below_colour;
    if (v > bins.high() && summary.above_range) return above_colour;
    return steps[bins.bin_of(v)];
  };

  // --- layout: everything measured before drawing ---
  int s = static_cast<int>(std::clamp<std::size_t>(720 / std::max(raster.nx, raster.ny), 1, 16));
  int map_w = static_cast<int>(raster.nx) * s, map_h = static_cast<int>(raster.ny) * s;
  MapProjection projection(raster, s);
  LonLatBox box = lonlat_extent(projection, map_w, map_h);
  double step_deg = graticule_step(box);
  summary.graticule_step_deg = step_deg;

  // Graticule lines in map pixels and their labels at the map's edges.
  std::vector<std::vector<Point>> graticule;
  std::vector<EdgeLabel> labels;
  double jump = 0.5 * std::max(map_w, map_h);
  auto add_line = [&](const LonLatLine& line, bool meridian, double value) {
    auto drawn = pieces(projection.pixels(line), jump);
    bool labelled = false;
    for (const auto& piece : drawn) {
      graticule.push_back(piece);
      for (auto edge : meridian ? std::vector<EdgeLabel::Edge>{EdgeLabel::bottom, EdgeLabel::top}
                                : std::vector<EdgeLabel::Edge>{EdgeLabel::left, EdgeLabel::right}) {
        if (labelled) break;
        if (auto at = crossing(piece, edge, map_w, map_h)) {
          labels.push_back({edge, *at, degrees_label(value, meridian)});
          labelled = true;
        }
      }
    }
    // Meridians of a global lat/lon map end at the poles, inside the map's outer cells: labelled
    // at the bottom when they end within one cell of it.
    if (meridian && !labelled)
      for (const auto& piece : drawn)
        for (const Point& end : {piece.front(), piece.back()})
          if (!labelled && end[0] >= 0 && end[0] <= map_w && end[1] >= map_h - 1.5 * s && end[1] <= map_h + 1e-6) {
            labels.push_back({EdgeLabel::bottom, end[0], degrees_label(value, meridian)});
            labelled = true;
          }
  };
  double lat_step = std::min(step_deg, 30.0);
  for (double lon = std::ceil(box.west / step_deg) * step_deg; lon <= box.east + 1e-9; lon += step_deg) {
    if (box.east - box.west >= 360.0 - 1e-9 && lon >= box.west + 360.0 - 1e-9) break;
    LonLatLine line;
    for (double lat = std::max(box.south, -90.0); lat <= std::min(box.north, 90.0) + 1e-9; lat += std::min(0.25, step_deg / 8))
      line.push_back({lon, lat});
    add_line(line, true, lon);
  }
  for (double lat = std::ceil(box.south / lat_step) * lat_step; lat <= box.north + 1e-9; lat += lat_step) {
    if (std::fabs(lat) >= 90.0 - 1e-9) continue;
    LonLatLine line;
    for (double lon = box.west; lon <= box.east + 1e-9; lon += std::min(0.25, step_deg / 8)) line.push_back({lon, lat});
    add_line(line, false, lat);
  }
  // Labels along each edge, in order, dropping any that would touch the one before.
  std::array<std::vector<EdgeLabel>, 4> by_edge;
  for (const auto& l : labels) by_edge[l.edge].push_back(l);
  double label_w = 0, label_h = Canvas::measure("0", kSmallPx).height();
  for (auto& edge : by_edge) {
    std::sort(edge.begin(), edge.end(), [](const EdgeLabel& a, const EdgeLabel& b) { return a.position < b.position; });
    std::vector<EdgeLabel> kept;
    double end = -HUGE_VAL;
    for (const auto& l : edge) {
      bool vertical = l.edge == EdgeLabel::left || l.edge == EdgeLabel::right;
      double extent = vertical ? label_h : Canvas::measure(l.text, kSmallPx).width;
      if (l.position - 0.5 * extent < end + 6) continue;
      kept.push_back(l);
      end = l.position + 0.5 * extent;
      if (vertical) label_w = std::max(label_w, Canvas::measure(l.text, kSmallPx).width);
    }
    edge = kept;
  }
  double gutter_left = by_edge[EdgeLabel::left].empty() ? 0 : label_w + 5;
  double gutter_right = by_edge[EdgeLabel::right].empty() ? 0 : label_w + 5;
  double gutter_top = by_edge[EdgeLabel::top].empty() ? 0 : label_h + 4;
  double gutter_bottom = by_edge[EdgeLabel::bottom].empty() ? 0 : label_h + 4;
  // Labels at the ends of an edge may reach past the map's corners by half their width.
  double overhang = 0;
  for (int e : {EdgeLabel::top, EdgeLabel::bottom})
    for (const auto& l : by_edge[e]) {
      double half = 0.5 * Canvas::measure(l.text, kSmallPx).width;
      overhang = std::max({overhang, half - l.position, l.position + half - map_w});
    }
  double side = std::max({gutter_left, gutter_right, overhang});

  int width = static_cast<int>(std::ceil(std::max(map_w + 2 * side + 2 * kPad, 540.0)));
  double text_w = width - 2 * kPad;
  std::string units = text_attribute(file, var->id, "units").value_or("");
  std::string long_name = text_attribute(file, var->id, "long_name").value_or("");
  std::vector<std::string> title = wrap(options.field + (units.empty() || units == "1" ? "" : " [" + units + "]"), text_w, kTitlePx);
  std::vector<std::string> sub = wrap(long_name, text_w, kTextPx);
  std::string when;
  if (has_group) {
    std::string by = text_attribute(file, NC_GLOBAL, "group_by").value_or("");
    std::string from = text_attribute(file, NC_GLOBAL, "time_coverage_start").value_or("");
    std::string to = text_attribute(file, NC_GLOBAL, "time_coverage_end").value_or("");
    when = "climatology group " + summary.group + (by.empty() ? "" : " (by " + by + ")") +
           (from.empty() ? "" : ", time steps from " + from + " to " + to);
  } else {
    when = "valid " + summary.valid_time;
  }
  for (auto& line : wrap(when + level_text, text_w, kTextPx)) sub.push_back(line);
  std::string settings = text_attribute(file, NC_GLOBAL, "latentlift_settings").value_or("");
  if (auto begin = settings.find("[analysis]"); begin != std::string::npos) {
    settings = settings.substr(begin + 10);
    settings = settings.substr(0, settings.find('['));
  }
  std::string crs_name = raster.crs->name();
  if (crs_name == "unknown" || crs_name == "unnamed") {
    const Attribute* mapping = find_attribute(grid.mapping, "grid_mapping_name");
    if (mapping && std::holds_alternative<std::string>(mapping->value)) crs_name = std::get<std::string>(mapping->value);
  }
  std::vector<std::string> notes;
  for (auto& line : wrap("grid: " + crs_name + ", " + std::to_string(raster.nx) + " x " + std::to_string(raster.ny) + " cells",
                         text_w, kSmallPx))
    notes.push_back(line);
  if (!settings.empty())
    for (auto& line : wrap("settings: " + settings, text_w, kSmallPx)) notes.push_back(line);

  // Shorelines at the map's scale.
  double km_per_pixel = raster.dx / s * (raster.crs->is_geographic() ? 111.2 : raster.crs->metres_per_unit() / 1000.0);
  char resolution = shoreline_resolution(km_per_pixel);
  double west = box.west, east = box.east;
  if (east - west > 360.0) east = west + 360.0;
  Shorelines shores = read_shorelines(west, east, box.south, box.north, resolution, 0.25 * km_per_pixel * km_per_pixel);
  summary.shorelines = shores.description();
  // Coastline pieces in map pixels, and whether any of them lies on the map.
  std::vector<std::vector<Point>> coast_px, border_px;
  for (const auto& line : shores.coast)
    for (auto& piece : pieces(projection.pixels(line), jump)) coast_px.push_back(std::move(piece));
  for (const auto& line : shores.borders)
    for (auto& piece : pieces(projection.pixels(line), jump)) border_px.push_back(std::move(piece));
  bool land_in_view = std::any_of(coast_px.begin(), coast_px.end(), [&](const std::vector<Point>& piece) {
    return std::any_of(piece.begin(), piece.end(), [&](const Point& p) { return p[0] >= 0 && p[0] <= map_w && p[1] >= 0 && p[1] <= map_h; });
  });
  std::string credit = "coastlines and borders: " + shores.description() + " (Wessel and Smith 1996); graticule every " +
                       format_value(step_deg) + "\u00b0" + (land_in_view ? "" : "; no coastline within the map: open sea");
  for (auto& line : wrap(credit, text_w, kSmallPx)) notes.push_back(line);

  // Legend: colour bar or classes, then missing / not applicable.
  struct Swatch {
    std::string text;
    std::optional<Rgb> colour;  // nullopt: the missing hatching
  };
  std::vector<Swatch> swatches;
  if (summary.classes)
    for (std::size_t k = 0; k < class_values.size(); ++k)
      swatches.push_back({class_names[k] + " (" + format_value(class_values[k]) + ")", category_colour(static_cast<int>(k))});
  swatches.push_back({"missing data", std::nullopt});
  std::size_t not_applicable = 0;
  if (!raster.reference.empty() && !summary.classes)
    for (std::size_t cell = 0; cell < raster.values.size(); ++cell)
      not_applicable += std::isnan(raster.values[cell]) && !std::isnan(raster.reference[cell]);
  if (not_applicable > 0)
    swatches.push_back({std::string("not applicable: column analysed, ") + options.field +
                            " undefined (no latent instability / no LFC)",
                        not_applicable_colour()});
  const double line_h = Canvas::measure("Ag", kTextPx).height() + 3;
  const double small_h = Canvas::measure("Ag", kSmallPx).height() + 2;
  const double title_h = Canvas::measure("Ag", kTitlePx, true).height() + 2;
  const double box_w = 18, box_h = 11;
  // Swatch rows: entries side by side while they fit; an entry wider than a row is wrapped.
  struct PlacedSwatch {
    Swatch swatch;
    double x, y;
    std::vector<std::string> lines;
  };
  std::vector<PlacedSwatch> placed;
  double y = kPad;
  double title_y = y;
  y += title_h * title.size();
  double sub_y = y;
  y += line_h * sub.size() + kGap;
  double map_y = y + gutter_top;
  double map_x = std::floor((width - map_w) / 2.0);
  y = map_y + map_h + gutter_bottom + kGap + 4;
  double bar_y = y, bar_h = 16, bar_w = 0, bar_x = 0, tip = 0;
  std::vector<std::string> caption;
  std::vector<std::pair<double, std::string>> ticks;
  if (!summary.classes) {
    tip = 0.9 * bar_h;
    bar_w = std::min(text_w - 2 * tip, std::max(320.0, static_cast<double>(map_w) * 0.8));
    bar_w = std::floor(bar_w / bins.count) * bins.count;
    bar_x = std::floor((width - bar_w) / 2.0);
    double box = bar_w / bins.count;
    double widest = 0;
    for (int k = 0; k <= bins.count; ++k) widest = std::max(widest, Canvas::measure(format_value(bins.low + k * bins.step), kSmallPx).width);
    int stride = std::max(1, static_cast<int>(std::ceil((widest + 8) / box)));
    for (int k = 0; k <= bins.count; k += stride) ticks.push_back({bar_x + k * box, format_value(bins.low + k * bins.step)});
    caption = wrap((long_name.empty() ? options.field : long_name) + " [" + (units.empty() ? "1" : units) + "]" +
                       (options.range ? "" : ", range: 2nd to 98th percentile, rounded"),
                   text_w, kSmallPx);
    y += bar_h + 4 + small_h + small_h * caption.size() + kGap;
  }
  {
    double x = kPad;
    for (const auto& swatch : swatches) {
      double entry_w = box_w + 6 + Canvas::measure(swatch.text, kSmallPx).width + 16;
      if (x + entry_w > width - kPad && x > kPad) {
        x = kPad;
        y += small_h + 4;
      }
      PlacedSwatch p{swatch, x, y, wrap(swatch.text, text_w - box_w - 6, kSmallPx)};
      if (p.lines.size() > 1) {
        if (x > kPad) y += small_h + 4;
        p.x = kPad;
        p.y = y;
        y += small_h * (p.lines.size() - 1);
        x = width;  // next entry on a new row
      } else {
        x += entry_w;
      }
      placed.push_back(p);
    }
    y += small_h + kGap;
  }
  double notes_y = y;
  y += small_h * notes.size();
  int height = static_cast<int>(std::ceil(y + kPad));

  // --- drawing ---
  Canvas canvas(width, height, kWhite);
  for (std::size_t k = 0; k < title.size(); ++k)
    canvas.text(kPad, title_y + k * title_h + Canvas::measure("A", kTitlePx, true).ascent, title[k], kTitlePx, kInk, true);
  double ascent = Canvas::measure("A", kTextPx).ascent, small_ascent = Canvas::measure("A", kSmallPx).ascent;
  for (std::size_t k = 0; k < sub.size(); ++k) canvas.text(kPad, sub_y + k * line_h + ascent, sub[k], kTextPx, kSoftInk);

  RgbImage map(map_w, map_h, kWhite);
  for (std::size_t row = 0; row < raster.ny; ++row)
    for (std::size_t col = 0; col < raster.nx; ++col) {
      std::size_t cell = row * raster.nx + col;
      double v = raster.values[cell];
      auto colour = colour_of(v);
      bool not_applicable = !colour && std::isnan(v) && !raster.reference.empty() && !std::isnan(raster.reference[cell]) && !summary.classes;
      if (!colour) ++(not_applicable ? summary.not_applicable_cells : summary.missing_cells);
      for (int py = 0; py < s; ++py)
        for (int px = 0; px < s; ++px) {
          int xx = static_cast<int>(col) * s + px, yy = static_cast<int>(row) * s + py;
          map.set(xx, yy, colour ? *colour : not_applicable ? not_applicable_colour()
                                                            : missing_pattern(xx + static_cast<int>(map_x), yy + static_cast<int>(map_y)));
        }
    }
  canvas.blit(map, static_cast<int>(map_x), static_cast<int>(map_y));
  canvas.clip(map_x, map_y, map_w, map_h);
  auto shifted = [&](const std::vector<Point>& line) {
    std::vector<Point> out(line);
    for (auto& p : out) p = {p[0] + map_x, p[1] + map_y};
    return out;
  };
  for (const auto& line : graticule) canvas.polyline(shifted(line), kGraticule, 0.8, 0.6);
  auto draw_shore = [&](const std::vector<std::vector<Point>>& lines, Rgb colour, double w, double dash) {
    std::vector<std::vector<Point>> drawn;
    for (const auto& piece : lines) drawn.push_back(shifted(piece));
    for (const auto& piece : drawn) canvas.polyline(piece, kWhite, w + 1.6, 0.55);  // halo: visible on dark cells
    for (const auto& piece : drawn) canvas.polyline(piece, colour, w, 1.0, dash);
  };
  draw_shore(border_px, kBorder, 0.8, 3.0);
  draw_shore(coast_px, kCoast, 1.1, 0);
  canvas.reset_clip();
  canvas.frame(map_x, map_y, map_w, map_h, kFrame);
  for (const auto& edge : by_edge)
    for (const auto& l : edge) {
      double w = Canvas::measure(l.text, kSmallPx).width;
      double lx = 0, ly = 0;
      switch (l.edge) {
        case EdgeLabel::left: lx = map_x - 5 - w, ly = map_y + l.position + 0.5 * small_ascent - 1; break;
        case EdgeLabel::right: lx = map_x + map_w + 5, ly = map_y + l.position + 0.5 * small_ascent - 1; break;
        case EdgeLabel::top: lx = map_x + l.position - 0.5 * w, ly = map_y - 4 - (label_h - small_ascent); break;
        case EdgeLabel::bottom: lx = map_x + l.position - 0.5 * w, ly = map_y + map_h + 3 + small_ascent; break;
      }
      lx = std::clamp(lx, kPad, width - kPad - w);
      canvas.text(lx, ly, l.text, kSmallPx, kSoftInk);
    }

  if (!summary.classes) {
    double box = bar_w / bins.count;
    for (int k = 0; k < bins.count; ++k) canvas.fill_rect(bar_x + k * box, bar_y, box + 0.5, bar_h, steps[k]);
    canvas.frame(bar_x, bar_y, bar_w, bar_h, kFrame);
    if (summary.below_range)
      canvas.polygon({{bar_x - 1, bar_y - 0.5}, {bar_x - 1 - tip, bar_y + 0.5 * bar_h}, {bar_x - 1, bar_y + bar_h + 0.5}},
                     below_colour, &kFrame);
    if (summary.above_range)
      canvas.polygon({{bar_x + bar_w + 1, bar_y - 0.5}, {bar_x + bar_w + 1 + tip, bar_y + 0.5 * bar_h},
                      {bar_x + bar_w + 1, bar_y + bar_h + 0.5}},
                     above_colour, &kFrame);
    for (const auto& [tx, label] : ticks) {
      canvas.fill_rect(tx - 0.5, bar_y + bar_h, 1, 3, kFrame);
      double w = Canvas::measure(label, kSmallPx).width;
      canvas.text(std::clamp(tx - 0.5 * w, kPad, width - kPad - w), bar_y + bar_h + 4 + small_ascent, label, kSmallPx, kInk);
    }
    for (std::size_t k = 0; k < caption.size(); ++k) {
      double w = Canvas::measure(caption[k], kSmallPx).width;
      canvas.text((width - w) / 2, bar_y + bar_h + 4 + small_h * (k + 1) + small_ascent, caption[k], kSmallPx, kInk);
    }
  }
  for (const auto& p : placed) {
    if (p.swatch.colour) {
      canvas.fill_rect(p.x, p.y, box_w, box_h, *p.swatch.colour);
    } else {
      canvas.hatch(p.x, p.y, box_w, box_h);
    }
    canvas.frame(p.x, p.y, box_w, box_h, kFrame);
    for (std::size_t k = 0; k < p.lines.size(); ++k)
      canvas.text(p.x + box_w + 6, p.y + k * small_h + 0.5 * box_h + 0.5 * small_ascent - 1, p.lines[k], kSmallPx, kInk);
  }
  for (std::size_t k = 0; k < notes.size(); ++k) canvas.text(kPad, notes_y + k * small_h + small_ascent, notes[k], kSmallPx, kSoftInk);

  io::detail::TemporaryOutput staged(png_path, options.overwrite);
  write_png(staged.path(), canvas.pixels(), png_path);
  staged.commit();

  summary.width = width;
  summary.height = height;
  summary.map_x = static_cast<int>(map_x);
  summary.map_y = static_cast<int>(map_y);
  summary.map_width = map_w;
  summary.map_height = map_h;
  summary.pixels_per_cell = s;
  summary.west = raster.west;
  summary.north = raster.north;
  summary.dx = raster.dx;
  summary.dy = raster.dy;
  summary.crs_definition = raster.crs->proj_string();
  return summary;
}

}  // namespace latentlift::maps
