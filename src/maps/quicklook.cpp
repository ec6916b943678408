// latentlift quicklook: a PNG map of one field with title, colour bar or class legend,
// and a world file (.pgw) plus .prj for GIS.
#include "latentlift/quicklook.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "maps/colour_scale.hpp"
#include "maps/font.hpp"
#include "io/netcdf_file.hpp"
#include "maps/png_image.hpp"
#include "geo/proj_handles.hpp"
#include "maps/resample.hpp"
#include "maps/source_grid.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps {

namespace {

using namespace detail;

const Rgb kWhite{255, 255, 255}, kInk{30, 30, 30}, kFrame{60, 60, 60};
const Rgb kMissingBase{236, 236, 236}, kMissingLine{150, 150, 150};

Rgb missing_pattern(int x, int y) { return (x + y) % 6 == 0 ? kMissingLine : kMissingBase; }

// --- time decoding (CF 1.8 sec. 4.4; standard/gregorian/proleptic_gregorian calendars) ---

// Days since 1970-01-01 of a proleptic Gregorian date (the well-known civil-from-days algorithm).
long long days_from_civil(long long y, unsigned m, unsigned d) {
  y -= m <= 2;
  const long long era = (y >= 0 ? y : y - 399) / 400;
  const unsigned yoe = static_cast<unsigned>(y - era * 400);
  const unsigned doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  const unsigned doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + static_cast<long long>(doe) - 719468;
}

void civil_from_days(long long z, long long& y, unsigned& m, unsigned& d) {
  z += 719468;
  const long long era = (z >= 0 ? z : z - 146096) / 146097;
  const unsigned doe = static_cast<unsigned>(z - era * 146097);
  const unsigned yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
  y = static_cast<long long>(yoe) + era * 400;
  const unsigned doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
  const unsigned mp = (5 * doy + 2) / 153;
  d = doy - (153 * mp + 2) / 5 + 1;
  m = mp < 10 ? mp + 3 : mp - 9;
  y += m <= 2;
}

std::string format_time(double value, const std::string& units, const std::string& calendar) {
  char raw[96];
  std::snprintf(raw, sizeof raw, "time %g %s", value, units.c_str());
  if (!(calendar.empty() || calendar == "standard" || calendar == "gregorian" || calendar == "proleptic_gregorian"))
    return raw;
  auto since = units.find(" since ");
  if (since == std::string::npos) return raw;
  std::string unit = units.substr(0, since);
  double seconds_per_unit = 0;
  if (unit == "seconds" || unit == "second" || unit == "s" || unit == "sec") seconds_per_unit = 1;
  else if (unit == "minutes" || unit == "minute" || unit == "min") seconds_per_unit = 60;
  else if (unit == "hours" || unit == "hour" || unit == "h" || unit == "hr") seconds_per_unit = 3600;
  else if (unit == "days" || unit == "day" || unit == "d") seconds_per_unit = 86400;
  else return raw;
  int year = 0, month = 0, day = 0, hour = 0, minute = 0;
  double second = 0;
  std::string reference = units.substr(since + 7);
  std::replace(reference.begin(), reference.end(), 'T', ' ');
  int fields = std::sscanf(reference.c_str(), "%d-%d-%d %d:%d:%lf", &year, &month, &day, &hour, &minute, &second);
  if (fields < 3 || month < 1 || month > 12 || day < 1 || day > 31) return raw;
  double total = static_cast<double>(days_from_civil(year, month, day)) * 86400.0 + hour * 3600.0 + minute * 60.0 +
                 second + value * seconds_per_unit;
  long long whole_days = static_cast<long long>(std::floor(total / 86400.0));
  long long rest = std::llround(total - static_cast<double>(whole_days) * 86400.0);
  if (rest >= 86400) {
    ++whole_days;
    rest -= 86400;
  }
  long long y;
  unsigned m, d;
  civil_from_days(whole_days, y, m, d);
  char text[64];
  std::snprintf(text, sizeof text, "%04lld-%02u-%02u %02lld:%02lld UTC", y, m, d, rest / 3600, (rest / 60) % 60);
  return text;
}

std::string format_value(double v) {
  char text[32];
  if (v != 0 && (std::fabs(v) >= 1e6 || std::fabs(v) < 1e-3))
    std::snprintf(text, sizeof text, "%.3g", v);
  else
    std::snprintf(text, sizeof text, "%.6g", std::fabs(v) < 1e-12 ? 0.0 : v);
  return text;
}

// Splits text into lines of at most `width` characters at spaces.
std::vector<std::string> wrap(const std::string& text, std::size_t width) {
  std::vector<std::string> lines;
  std::istringstream words(text);
  std::string line;
  for (std::string word; words >> word;) {
    while (word.size() > width) {
      if (!line.empty()) lines.push_back(line), line.clear();
      lines.push_back(word.substr(0, width));
      word = word.substr(width);
    }
    if (!line.empty() && line.size() + 1 + word.size() > width) lines.push_back(line), line.clear();
    line += (line.empty() ? "" : " ") + word;
  }
  if (!line.empty()) lines.push_back(line);
  return lines;
}

struct Raster {
  std::size_t nx = 0, ny = 0;            // columns west->east, rows north->south
  std::vector<double> values;            // row-major, row 0 north
  bool georeferenced = false;            // regular in `crs`
  std::optional<geo::Crs> crs;
  double west = 0, north = 0, dx = 0, dy = 0;  // outer edges and cell size (dy > 0)
};

Raster raster_of_rectilinear(const SourceGrid& grid, const std::vector<double>& slice) {
  Raster r;
  r.nx = grid.x.size();
  r.ny = grid.y.size();
  r.values.resize(r.nx * r.ny);
  bool x_up = r.nx < 2 || grid.x[1] > grid.x[0], y_up = r.ny < 2 || grid.y[1] > grid.y[0];
  for (std::size_t j = 0; j < r.ny; ++j)
    for (std::size_t i = 0; i < r.nx; ++i) {
      std::size_t col = x_up ? i : r.nx - 1 - i, row = y_up ? r.ny - 1 - j : j;
      r.values[row * r.nx + col] = slice[j * r.nx + i];
    }
  r.crs = grid.crs;
  if (grid.regular()) {
    r.dx = r.nx > 1 ? std::fabs(grid.x.back() - grid.x.front()) / static_cast<double>(r.nx - 1) : 1.0;
    r.dy = r.ny > 1 ? std::fabs(grid.y.back() - grid.y.front()) / static_cast<double>(r.ny - 1) : 1.0;
    r.west = std::min(grid.x.front(), grid.x.back()) - 0.5 * r.dx;
    r.north = std::max(grid.y.front(), grid.y.back()) + 0.5 * r.dy;
    r.georeferenced = true;
  }
  return r;
}

// Cells with lat/lon each: drawn on a lon/lat grid (about four pixels of grid per cell) by nearest cell.
Raster raster_of_points(const SourceGrid& grid, const std::vector<double>& slice) {
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
  std::vector<double> values;
  plan.nearest(slice, values);
  Raster r;
  r.nx = target.nx;
  r.ny = target.ny;
  r.values.resize(values.size());
  for (std::size_t j = 0; j < r.ny; ++j)
    for (std::size_t i = 0; i < r.nx; ++i) r.values[(r.ny - 1 - j) * r.nx + i] = values[j * r.nx + i];
  r.crs = grid.crs;
  r.georeferenced = true;
  r.west = target.west;
  r.north = target.north();
  r.dx = r.dy = resolution;
  return r;
}

std::vector<std::string> split(const std::string& text) {
  std::istringstream in(text);
  std::vector<std::string> out;
  for (std::string word; in >> word;) out.push_back(word);
  return out;
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
  if (!options.overwrite && fs::exists(png_path)) throw UsageError(png_path + " exists; use --overwrite to replace it");
  io::detail::NcFile file = io::detail::NcFile::open_read(input);
  auto var = io::detail::find_variable(file, options.field);
  if (!var) throw InputError(input, options.field, "a field of this name; the file has " + closest_fields(file, options.field));
  SourceGrid grid = grid_of(file, *var);

  // Leading indices: the time dimension takes --time, any other (levels) --level.
  std::size_t lead = var->dim_names.size() - grid.dims.size();
  std::vector<std::size_t> index(lead, 0);
  std::string valid_time, level_text;
  bool has_time = false;
  for (std::size_t k = 0; k < lead; ++k) {
    const std::string& dim = var->dim_names[k];
    auto coordinate = io::detail::find_variable(file, dim);
    std::string units = coordinate ? io::detail::text_attribute(file, coordinate->id, "units").value_or("") : "";
    bool is_time = units.find(" since ") != std::string::npos || dim == "time";
    std::size_t wanted = is_time ? options.time_index : options.level_index;
    if (wanted >= var->shape[k])
      throw UsageError(std::string(is_time ? "--time " : "--level ") + std::to_string(wanted) + " is beyond the " +
                       std::to_string(var->shape[k]) + " steps of dimension '" + dim + "' in " + input);
    index[k] = wanted;
    std::optional<double> value;
    if (coordinate && coordinate->dim_names.size() == 1) value = io::detail::read_doubles(file, *coordinate).at(wanted);
    if (is_time) {
      has_time = true;
      std::string calendar = coordinate ? io::detail::text_attribute(file, coordinate->id, "calendar").value_or("") : "";
      valid_time = value ? format_time(*value, units, calendar) : "time index " + std::to_string(wanted);
    } else {
      level_text += ", " + dim + " " + (value ? format_value(*value) + (units.empty() ? "" : " " + units) : std::to_string(wanted));
    }
  }
  if (!has_time && options.time_index != 0) throw UsageError("--time given but " + options.field + " has no time dimension");

  std::vector<double> slice = read_slice(file, *var, grid, index);
  Raster raster = grid.kind == SourceGrid::Kind::rectilinear ? raster_of_rectilinear(grid, slice)
                                                             : raster_of_points(grid, slice);

  // Colours.
  QuicklookSummary summary;
  summary.valid_time = valid_time.empty() ? "no time dimension" : valid_time;
  summary.classes = is_class_field(file, *var);
  std::vector<double> class_values;
  std::vector<std::string> class_names;
  ColourBins bins;
  std::vector<Rgb> steps;
  if (summary.classes) {
    auto values = io::detail::number_attribute(file, var->id, "flag_values");
    class_names = split(io::detail::text_attribute(file, var->id, "flag_meanings").value_or(""));
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
    if (options.range) lo = (*options.range)[0], hi = (*options.range)[1];
    if (!(lo <= hi)) lo = 0, hi = 1;  // all missing: an empty map
    if (options.range && !(hi > lo)) throw UsageError("--range needs MIN < MAX");
    bins = nice_bins(lo, hi);
    steps = sequential_steps(bins.count);
    summary.low = bins.low;
    summary.step = bins.step;
    summary.bins = bins.count;
  }
  auto colour_of = [&](double v, int x, int y) -> Rgb {
    if (std::isnan(v)) return missing_pattern(x, y);
    if (summary.classes) {
      for (std::size_t k = 0; k < class_values.size(); ++k)
        if (class_values[k] == v) return category_colour(static_cast<int>(k));
      return missing_pattern(x, y);  // not a declared class: shown as missing
    }
    return steps[bins.bin_of(v)];
  };

  // Layout.
  const int margin = 12;
  int s = static_cast<int>(std::clamp<std::size_t>(720 / std::max(raster.nx, raster.ny), 1, 16));
  int map_w = static_cast<int>(raster.nx) * s, map_h = static_cast<int>(raster.ny) * s;
  int width = std::max(map_w + 2 * margin, 440);
  std::size_t chars = static_cast<std::size_t>((width - 2 * margin) / kGlyphAdvance);
  std::string units = io::detail::text_attribute(file, var->id, "units").value_or("");
  std::string long_name = io::detail::text_attribute(file, var->id, "long_name").value_or("");
  std::string title = options.field + (units.empty() || units == "1" ? "" : " [" + units + "]");
  std::vector<std::string> sub = wrap(long_name, chars);
  std::string when = "valid " + summary.valid_time + level_text;
  for (auto& line : wrap(when, chars)) sub.push_back(line);
  // The [analysis] part of the recorded settings (the input aliases are not needed on a map).
  std::string settings = io::detail::text_attribute(file, NC_GLOBAL, "latentlift_settings").value_or("");
  if (auto begin = settings.find("[analysis]"); begin != std::string::npos) {
    settings = settings.substr(begin + 10);
    settings = settings.substr(0, settings.find('['));
  }
  std::string crs_name = grid.crs ? grid.crs->name() : std::string("?");
  if (crs_name == "unknown" || crs_name == "unnamed") {
    const geo::Attribute* mapping = geo::find_attribute(grid.mapping, "grid_mapping_name");
    if (mapping && std::holds_alternative<std::string>(mapping->value)) crs_name = std::get<std::string>(mapping->value);
  }
  std::string crs_text = "grid: " + crs_name + ", " +
                         std::to_string(raster.nx) + " x " + std::to_string(raster.ny) + " cells";
  for (auto& line : wrap(crs_text, chars)) sub.push_back(line);
  if (!settings.empty())
    for (auto& line : wrap("settings: " + settings, chars)) sub.push_back(line);

  int title_scale = text_width(title, 2) <= width - 2 * margin ? 2 : 1;
  int y = margin;
  int title_y = y;
  y += kGlyphHeight * title_scale + 6;
  int sub_y = y;
  y += static_cast<int>(sub.size()) * 10 + 6;
  int map_x = (width - map_w) / 2, map_y = y;
  y += map_h + 12;
  // Legend entries below the map.
  int legend_y = y;
  int bar_w = 0, box_w = 0;
  std::vector<std::pair<std::string, Rgb>> class_entries;
  if (summary.classes) {
    for (std::size_t k = 0; k < class_values.size(); ++k)
      class_entries.push_back({class_names[k] + " (" + format_value(class_values[k]) + ")", category_colour(static_cast<int>(k))});
    int x = margin, rows = 1;
    for (const auto& entry : class_entries) {
      int w = 18 + text_width(entry.first) + 14;
      if (x + w > width - margin && x > margin) x = margin, ++rows;
      x += w;
    }
    y += rows * 16 + 4;
  } else {
    box_w = std::max(1, std::min(width - 2 * margin, std::max(300, map_w)) / bins.count);
    bar_w = box_w * bins.count;
    y += 16 + 4 + 10 + 12;  // bar, tick labels, units line
  }
  int missing_y = y;
  y += 14 + margin;
  int height = y;

  RgbImage image(width, height, kWhite);
  draw_text(image, margin, title_y, title, kInk, title_scale);
  for (std::size_t k = 0; k < sub.size(); ++k) draw_text(image, margin, sub_y + static_cast<int>(k) * 10, sub[k], kInk);
  for (std::size_t row = 0; row < raster.ny; ++row)
    for (std::size_t col = 0; col < raster.nx; ++col) {
      double v = raster.values[row * raster.nx + col];
      for (int py = 0; py < s; ++py)
        for (int px = 0; px < s; ++px) {
          int xx = map_x + static_cast<int>(col) * s + px, yy = map_y + static_cast<int>(row) * s + py;
          image.set(xx, yy, colour_of(v, xx, yy));
        }
    }
  image.frame(map_x - 1, map_y - 1, map_w + 2, map_h + 2, kFrame);

  if (summary.classes) {
    int x = margin, row_y = legend_y;
    for (const auto& [name, colour] : class_entries) {
      int w = 18 + text_width(name) + 14;
      if (x + w > width - margin && x > margin) x = margin, row_y += 16;
      image.fill_rect(x, row_y, 14, 10, colour);
      image.frame(x, row_y, 14, 10, kFrame);
      draw_text(image, x + 18, row_y + 2, name, kInk);
      x += w;
    }
  } else {
    int bar_x = (width - bar_w) / 2;
    for (int k = 0; k < bins.count; ++k) image.fill_rect(bar_x + k * box_w, legend_y, box_w, 16, steps[k]);
    image.frame(bar_x - 1, legend_y - 1, bar_w + 2, 18, kFrame);
    int widest = 0;
    for (int k = 0; k <= bins.count; ++k) widest = std::max(widest, text_width(format_value(bins.low + k * bins.step)));
    int stride = std::max(1, (widest + 8 + box_w - 1) / box_w);
    for (int k = 0; k <= bins.count; k += stride) {
      std::string label = format_value(bins.low + k * bins.step);
      int tx = bar_x + k * box_w;
      image.fill_rect(tx, legend_y + 16, 1, 3, kFrame);
      draw_text(image, std::clamp(tx - text_width(label) / 2, 0, width - text_width(label)), legend_y + 21, label, kInk);
    }
    std::string caption = (long_name.empty() ? options.field : long_name) + " [" + (units.empty() ? "1" : units) + "]";
    draw_text(image, (width - text_width(caption)) / 2, legend_y + 33, caption, kInk);
  }
  for (int py = 0; py < 10; ++py)
    for (int px = 0; px < 14; ++px) image.set(margin + px, missing_y + py, missing_pattern(margin + px, missing_y + py));
  image.frame(margin, missing_y, 14, 10, kFrame);
  draw_text(image, margin + 18, missing_y + 2, "missing (or outside the grid)", kInk);

  // Write PNG (via a temporary name), world file and .prj.
  fs::path png(png_path);
  fs::path temporary = png;
  temporary += ".tmp";
  write_png(temporary.string(), image);
  fs::rename(temporary, png);
  if (raster.georeferenced && raster.crs) {
    // World file: pixel size and the map coordinates of the top-left pixel's centre (ESRI convention).
    double a = raster.dx / s, e = -raster.dy / s;
    double c = raster.west + 0.5 * a - a * map_x, f = raster.north + 0.5 * e - e * map_y;
    fs::path world = png, prj = png, aux = png;
    world.replace_extension(".pgw");
    prj.replace_extension(".prj");
    aux += ".aux.xml";
    std::ofstream out(world);
    char line[64];
    for (double v : {a, 0.0, 0.0, e, c, f}) {
      std::snprintf(line, sizeof line, "%.12f\n", v);
      out << line;
    }
    out.close();
    if (!out) throw Error(world.string() + ": cannot write");
    summary.world_file = world.string();
    if (!raster.crs->esri_wkt().empty()) {
      std::ofstream(prj) << raster.crs->esri_wkt() << "\n";
      summary.prj_file = prj.string();
    }
    // GDAL's sidecar (PAM) carries the CRS as WKT2, rotated poles included; world-file x/y are easting, northing.
    std::string wkt;
    for (char ch : raster.crs->wkt()) wkt += ch == '&' ? "&amp;" : ch == '<' ? "&lt;" : ch == '>' ? "&gt;" : std::string(1, ch);
    std::ofstream(aux) << "<PAMDataset>\n  <SRS dataAxisToSRSAxisMapping=\""
                       << (raster.crs->impl().northing_first ? "2,1" : "1,2") << "\">" << wkt << "</SRS>\n</PAMDataset>\n";
    summary.aux_file = aux.string();
  }
  summary.width = width;
  summary.height = height;
  summary.map_x = map_x;
  summary.map_y = map_y;
  summary.map_width = map_w;
  summary.map_height = map_h;
  summary.pixels_per_cell = s;
  return summary;
}

}  // namespace latentlift::maps
