// latentlift column INPUT.nc --lat LAT --lon LON [--time INDEX] [--format table|csv|json]
//                   [--config FILE] [--set KEY=VALUE]...
// The grid column nearest (great-circle distance) to a point: per-level table and summary.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "io/plausibility.hpp"
#include "latentlift/cli.hpp"
#include "latentlift/climatology.hpp"
#include "latentlift/column.hpp"
#include "latentlift/config.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "latentlift/thermo.hpp"

namespace latentlift::cli {

namespace {

struct ColumnArgs {
  std::vector<std::string> inputs;  // like analyze: fields may be split across files
  std::string input, config, format = "table";
  std::vector<std::string> sets;
  std::string lat_text, lon_text;
  double lat = 0.0, lon = 0.0;
  std::size_t time = 0;
  const MemoryDataset* memory = nullptr;  // read instead of the files (the Python module's datasets)
};

constexpr double kDegToRad = 3.14159265358979323846 / 180.0;

/// Central angle between two points (haversine; common practice), radians.
double central_angle(double lat1, double lon1, double lat2, double lon2) {
  const double p1 = lat1 * kDegToRad, p2 = lat2 * kDegToRad;
  const double dp = p2 - p1, dl = (lon2 - lon1) * kDegToRad;
  const double a = std::sin(dp / 2) * std::sin(dp / 2) + std::cos(p1) * std::cos(p2) * std::sin(dl / 2) * std::sin(dl / 2);
  return 2.0 * std::asin(std::min(1.0, std::sqrt(a)));
}

std::string number(double value, int decimals) {
  if (std::isnan(value)) return "";
  char text[64];
  std::snprintf(text, sizeof text, "%.*f", decimals, value);
  return text;
}

const char* stability_name(int code) {
  static const char* names[] = {"absolutely_stable", "conditionally_unstable", "absolutely_unstable",
                                "neutral_saturated", "neutral_dry"};
  return code >= 0 && code <= 4 ? names[code] : "";
}

const char* latent_class_name(int code) {
  static const char* names[] = {"none", "pseudo_latent", "real_latent"};
  return code >= 0 && code <= 2 ? names[code] : "";
}

struct Row {
  double p_hpa, z_m, t_k, td_k, tw_k, thw_k, thws_k, excess_k;
  int latent_flag, stability;
  bool below_ground;
};

/// Decimal degrees from --lat/--lon text; a plain UsageError otherwise (e.g. "50N").
double parse_degrees(const std::string& text, const char* option, const char* direction) {
  std::size_t used = 0;
  double value = 0.0;
  try {
    value = std::stod(text, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used == 0 || used != text.size() || !std::isfinite(value))
    throw UsageError(std::string(option) + " " + text + ": expected a number of degrees " + direction +
                     " (e.g. 50 or -33.5; south and west are negative, no letters)");
  return value;
}

/// The valid time of time index `index` as ISO 8601, or "" without a usable time coordinate.
std::string valid_time_text(const GridDescription& grid, std::size_t index) {
  if (index >= grid.time_values.size() || grid.time_units.empty()) return "";
  try {
    climatology::TimeUnits units = climatology::parse_time_units(grid.time_units, grid.time_calendar.empty() ? "standard" : grid.time_calendar);
    return climatology::iso8601(static_cast<std::int64_t>(std::llround(grid.time_values[index] * units.seconds_per_unit)) +
                   units.epoch_s);
  } catch (const std::invalid_argument&) {
    return "";
  }
}

std::string json_text(const std::string& text) {
  std::string out = "\"";
  for (char c : text) {
    if (c == '"' || c == '\\') out += '\\';
    out += c;
  }
  return out + "\"";
}

std::string report(ColumnArgs args) {
  if (args.format != "table" && args.format != "csv" && args.format != "json")
    throw UsageError("--format: expected table, csv or json, got " + args.format);
  args.lat = parse_degrees(args.lat_text, "--lat", "north");
  args.lon = parse_degrees(args.lon_text, "--lon", "east");
  if (!(args.lat >= -90.0 && args.lat <= 90.0)) throw UsageError("--lat: expected -90 to 90 degrees");
  RunConfig config = load_config(args.config, args.sets);
  const std::unique_ptr<InputDataset> opened =
      args.memory ? InputDataset::from_memory(*args.memory, config.aliases, config.conventions)
                  : std::make_unique<InputDataset>(args.inputs, config.aliases, config.conventions);
  const InputDataset& input = *opened;
  const GridDescription& grid = input.grid();
  if (args.time >= grid.n_times)
    throw UsageError("--time " + std::to_string(args.time) + ": the input has " + std::to_string(grid.n_times) +
                     " time step(s) (0 to " + std::to_string(grid.n_times - 1) + ")");
  std::vector<double> lats, lons;
  input.column_lat_lon(lats, lons);
  std::size_t best = 0;
  double best_angle = std::numeric_limits<double>::infinity();
  for (std::size_t c = 0; c < lats.size(); ++c) {
    if (std::isnan(lats[c]) || std::isnan(lons[c])) continue;
    double angle = central_angle(args.lat, args.lon, lats[c], lons[c]);
    if (angle < best_angle) {
      best_angle = angle;
      best = c;
    }
  }
  // A point outside the grid has a nearest column, but not a meaningful one: refuse it when
  // it lies farther than 1.5 grid spacings (distance from the nearest column to its neighbours).
  double spacing = 0.0;
  auto consider = [&](std::size_t other) {
    if (other < lats.size() && other != best && !std::isnan(lats[other]) && !std::isnan(lons[other]))
      spacing = std::max(spacing, central_angle(lats[best], lons[best], lats[other], lons[other]));
  };
  if (grid.horizontal.size() == 2) {
    const std::size_t nx = grid.horizontal[1].length;
    if (best % nx > 0) consider(best - 1);
    if (best % nx + 1 < nx) consider(best + 1);
    if (best >= nx) consider(best - nx);
    consider(best + nx);
  } else {
    double nearest = std::numeric_limits<double>::infinity();
    for (std::size_t c = 0; c < lats.size(); ++c)
      if (c != best && !std::isnan(lats[c]) && !std::isnan(lons[c]))
        nearest = std::min(nearest, central_angle(lats[best], lons[best], lats[c], lons[c]));
    if (std::isfinite(nearest)) spacing = nearest;
  }
  if (spacing > 0.0 && best_angle > 1.5 * spacing)
    throw UsageError("--lat " + number(args.lat, 4) + " --lon " + number(args.lon, 4) + ": outside the grid of " +
                     args.input + " (nearest column " + number(best_angle * 6371.0, 1) + " km away)");

  // The first step of the chosen time (other outer dimensions at index 0).
  std::size_t step = 0;
  for (std::size_t s = 0; s < grid.n_steps; ++s)
    if (time_index_of_step(grid, s) == args.time) {
      step = s;
      break;
    }
  ColumnBlock block;
  input.read_block(step, {best, 1}, block);
  AnalysisSettings settings = config.analysis;
  settings.level_fields = true;
  ColumnInput in;
  in.n_levels = block.n_levels;
  in.pressure_pa = grid.pressure_pa.data();
  in.temp_k = block.temp_k.data();
  in.humidity = block.humidity.data();
  in.humidity_kind = block.humidity_kind;
  in.height_m = block.height_m.data();
  in.surface_pressure_pa = block.surface_pressure_pa.empty() ? -1.0 : block.surface_pressure_pa[0];
  const double surface_hpa = in.surface_pressure_pa > 0 ? in.surface_pressure_pa / 100.0 : std::nan("");
  const std::string valid_time = valid_time_text(grid, args.time);
  const std::string surface_source = surface_pressure_description(input);
  warn_without_surface_pressure(input, "column");
  ColumnAnalyzer analyzer(settings);
  ColumnResult r;
  const std::string where = "the column at " + number(lats[best], 4) + ", " + number(lons[best], 4) + " (time index " +
                            std::to_string(args.time) + ")";
  if (!block.surface_pressure_pa.empty() && input.surface_pressure_source() == SurfacePressureSource::input &&
      !io::detail::plausible_surface_pressure(in.surface_pressure_pa))
    throw InputError(args.input, "", where + ": a surface pressure from 300 to 1100 hPa (found " +
                                         (std::isnan(in.surface_pressure_pa) ? std::string("a missing value")
                                                                             : number(in.surface_pressure_pa / 100.0, 1) + " hPa") +
                                         ")");
  analyzer.analyze(in, r);
  if (r.qc.columns_analysed == 0)  // nothing analysed is never a result
    throw InputError(args.input, "", where + ": at least 3 usable levels (levels with temperature, humidity and a "
                                             "pressure above the ground; " +
                                             std::to_string(r.qc.temperature_rejected) +
                                             " temperatures outside 150-350 K)");

  // Levels from the bottom up (highest pressure first).
  std::vector<int> order(block.n_levels);
  for (int k = 0; k < block.n_levels; ++k) order[k] = k;
  std::sort(order.begin(), order.end(), [&](int a, int b) { return grid.pressure_pa[a] > grid.pressure_pa[b]; });
  std::vector<Row> rows;
  const LevelFields& lf = r.levels;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  auto at = [&](const std::vector<double>& v, int k) { return k < static_cast<int>(v.size()) ? v[k] : nan; };
  auto at8 = [&](const std::vector<std::int8_t>& v, int k) { return k < static_cast<int>(v.size()) ? int(v[k]) : -1; };
  for (int k : order)
    rows.push_back({grid.pressure_pa[k] / 100.0, block.height_m[k], block.temp_k[k], at(lf.dew_point_k, k),
                    at(lf.wet_bulb_temperature_k, k), at(lf.wet_bulb_potential_temperature_k, k),
                    at(lf.saturation_theta_w_k, k), at(lf.max_parcel_excess_k, k), at8(lf.latent_flag, k),
                    at8(lf.stability_class, k), grid.pressure_pa[k] / 100.0 > surface_hpa});
  struct Summary {
    const char* name;
    const char* units;
    double value;
  };
  const std::vector<Summary> summary = {
      {"latent_layer_depth", "hPa", r.latent_layer_depth_pa / 100},
      {"latent_layer_depth_z", "m", r.latent_layer_depth_z_m},
      {"latent_layer_bottom", "hPa", r.latent_layer_bottom_pa / 100},
      {"latent_layer_top", "hPa", r.latent_layer_top_pa / 100},
      {"tangent_theta_w", "K", r.tangent_theta_w_k},
      {"tangent_pressure", "hPa", r.tangent_pressure_pa / 100},
      {"mu_pressure", "hPa", r.mu_pressure_pa / 100},
      {"mu_theta_w", "K", r.mu_theta_w_k},
      {"mu_cape", "J kg-1", r.mu_cape_j_kg},
      {"mu_cin", "J kg-1", r.mu_cin_j_kg},
      {"mu_lfc_pressure", "hPa", r.mu_lfc_pressure_pa / 100},
      {"mu_el_pressure", "hPa", r.mu_el_pressure_pa / 100},
      {"mu_lift_to_lfc", "hPa", r.mu_lift_to_lfc_pa / 100},
      {"mu_lift_to_lfc_z", "m", r.mu_lift_to_lfc_z_m},
      {"easiest_lift", "hPa", r.easiest_lift_pa / 100},
      {"easiest_lift_pressure", "hPa", r.easiest_lift_pressure_pa / 100},
  };
  const double distance_km = best_angle * 6371.0;  // mean Earth radius (IUGG), km
  std::ostringstream out;
  if (args.format == "json") {
    auto json_number = [](double v, int decimals) { return std::isnan(v) ? std::string("null") : number(v, decimals); };
    out << "{\n  \"files\": [";
    for (std::size_t i = 0; i < args.inputs.size(); ++i) out << (i ? ", " : "") << json_text(args.inputs[i]);
    out << "],\n  \"column\": " << best << ",\n  \"latitude\": "
        << number(lats[best], 4) << ",\n  \"longitude\": " << number(lons[best], 4)
        << ",\n  \"distance_km\": " << number(distance_km, 1) << ",\n  \"time_index\": " << args.time
        << ",\n  \"valid_time\": " << (valid_time.empty() ? std::string("null") : json_text(valid_time))
        << ",\n  \"surface_pressure_hpa\": " << json_number(surface_hpa, 2)
        << ",\n  \"surface_pressure_source\": " << json_text(to_string(input.surface_pressure_source()))
        << ",\n  \"levels\": [\n";
    for (std::size_t i = 0; i < rows.size(); ++i) {
      const Row& w = rows[i];
      out << "    {\"pressure_hpa\": " << json_number(w.p_hpa, 2) << ", \"height_m\": " << json_number(w.z_m, 1)
          << ", \"temperature_k\": " << json_number(w.t_k, 2) << ", \"dew_point_k\": " << json_number(w.td_k, 2)
          << ", \"wet_bulb_temperature_k\": " << json_number(w.tw_k, 2)
          << ", \"theta_w_k\": " << json_number(w.thw_k, 2) << ", \"theta_w_star_k\": " << json_number(w.thws_k, 2)
          << ", \"max_parcel_excess_k\": " << json_number(w.excess_k, 2)
          << ", \"latent_flag\": " << (w.latent_flag < 0 ? "null" : std::to_string(w.latent_flag))
          << ", \"stability_class\": "
          << (w.stability < 0 ? std::string("null") : "\"" + std::string(stability_name(w.stability)) + "\"")
          << ", \"below_ground\": " << (w.below_ground ? "true" : "false") << "}"
          << (i + 1 < rows.size() ? "," : "") << "\n";
    }
    out << "  ],\n  \"summary\": {\n";
    for (const Summary& s : summary) out << "    \"" << s.name << "\": " << json_number(s.value, 2) << ",\n";
    out << "    \"latent_class\": "
        << (r.latent_class < 0 ? std::string("null") : "\"" + std::string(latent_class_name(r.latent_class)) + "\"")
        << "\n  }\n}\n";
  } else if (args.format == "csv") {
    out << "pressure_hpa,height_m,temperature_k,dew_point_k,wet_bulb_temperature_k,theta_w_k,theta_w_star_k,"
           "max_parcel_excess_k,latent_flag,stability_class,below_ground\n";
    for (const Row& w : rows)
      out << number(w.p_hpa, 2) << ',' << number(w.z_m, 1) << ',' << number(w.t_k, 2) << ',' << number(w.td_k, 2) << ','
          << number(w.tw_k, 2) << ',' << number(w.thw_k, 2) << ',' << number(w.thws_k, 2) << ','
          << number(w.excess_k, 2) << ',' << (w.latent_flag < 0 ? "" : std::to_string(w.latent_flag)) << ','
          << stability_name(w.stability) << ',' << (w.below_ground ? 1 : 0) << '\n';
    out << "\nfield,value,units\n";
    for (const Summary& s : summary) out << s.name << ',' << number(s.value, 2) << ',' << s.units << '\n';
    out << "latent_class," << latent_class_name(r.latent_class) << ",\n";
    out << "valid_time," << valid_time << ",\nsurface_pressure," << number(surface_hpa, 2) << ",hPa\n"
        << "surface_pressure_source," << to_string(input.surface_pressure_source()) << ",\n";
  } else {
    char line[256];
    std::snprintf(line, sizeof line, "column %zu at %.4f, %.4f (%.1f km from %.4f, %.4f), time index %zu\n", best,
                  lats[best], lons[best], distance_km, args.lat, args.lon, args.time);
    out << line;
    out << "valid time " << (valid_time.empty() ? std::string("unknown (no time coordinate)") : valid_time)
        << "\nsurface pressure " << (std::isnan(surface_hpa) ? std::string("-") : number(surface_hpa, 1) + " hPa")
        << ", source: " << surface_source << "\n";
    std::snprintf(line, sizeof line, "%8s %8s %7s %7s %7s %7s %7s %7s %6s  %s\n", "p hPa", "z m", "T K", "Td K",
                  "Tw K", "thw K", "thw* K", "exc K", "latent", "stability (layer above)");
    out << line;
    auto cell = [](double v, int decimals) { return std::isnan(v) ? std::string("-") : number(v, decimals); };
    for (const Row& w : rows) {
      std::snprintf(line, sizeof line, "%8s %8s %7s %7s %7s %7s %7s %7s %6s  %s\n", cell(w.p_hpa, 1).c_str(),
                    cell(w.z_m, 0).c_str(), cell(w.t_k, 1).c_str(), cell(w.td_k, 1).c_str(), cell(w.tw_k, 1).c_str(),
                    cell(w.thw_k, 1).c_str(), cell(w.thws_k, 1).c_str(), cell(w.excess_k, 2).c_str(),
                    w.latent_flag < 0 ? "-" : (w.latent_flag ? "yes" : "no"),
                    w.below_ground ? "below ground (not analysed)" : stability_name(w.stability));
      out << line;
    }
    out << "\n";
    for (const Summary& s : summary) {
      std::snprintf(line, sizeof line, "%-22s %10s %s\n", s.name, cell(s.value, 2).c_str(), s.units);
      out << line;
    }
    std::snprintf(line, sizeof line, "%-22s %10s\n", "latent_class",
                  r.latent_class < 0 ? "-" : latent_class_name(r.latent_class));
    out << line;
  }
  return out.str();
}

}  // namespace

namespace {

/// The arguments of `latentlift column` given as values (the library entry points below).
ColumnArgs report_args(double lat_deg, double lon_deg, std::size_t time_index, const std::string& format,
                       const std::string& config_path, const std::vector<std::string>& overrides) {
  ColumnArgs args;
  char text[64];
  std::snprintf(text, sizeof text, "%.17g", lat_deg);
  args.lat_text = text;
  std::snprintf(text, sizeof text, "%.17g", lon_deg);
  args.lon_text = text;
  args.time = time_index;
  args.format = format;
  args.config = config_path;
  args.sets = overrides;
  return args;
}

}  // namespace

std::string column_report(const std::vector<std::string>& inputs, double lat_deg, double lon_deg,
                          std::size_t time_index, const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides) {
  ColumnArgs args = report_args(lat_deg, lon_deg, time_index, format, config_path, overrides);
  args.inputs = inputs;
  for (const std::string& f : inputs) args.input += (args.input.empty() ? "" : " ") + f;
  return report(args);
}

std::string column_report(const MemoryDataset& dataset, double lat_deg, double lon_deg, std::size_t time_index,
                          const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides) {
  ColumnArgs args = report_args(lat_deg, lon_deg, time_index, format, config_path, overrides);
  args.memory = &dataset;
  args.inputs = {dataset.name};
  args.input = dataset.name;
  return report(args);
}

void add_column_command(CLI::App& app, int& exit_code) {
  auto args = std::make_shared<ColumnArgs>();
  CLI::App* cmd = app.add_subcommand("column", "Analyse the grid column nearest a point and print it level by level");
  cmd->add_option("input", args->inputs,
                  "Input NetCDF file (more files: fields split across them, e.g. surface pressure)")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("--lat", args->lat_text, "Latitude, degrees north (south negative)")->required();
  cmd->add_option("--lon", args->lon_text, "Longitude, degrees east (west negative)")->required();
  cmd->add_option("--time", args->time, "Time index (0-based)");
  cmd->add_option("--format", args->format, "Output format: table, csv or json");
  cmd->add_option("--config", args->config, "Configuration file (TOML)")->check(CLI::ExistingFile);
  cmd->add_option("--set", args->sets, "Override a configuration key: section.key=value (repeatable)")
      ->allow_extra_args(false)
      ->take_all();
  cmd->callback([args, &exit_code] {
    args->input.clear();  // the files, as named in messages and the JSON report
    for (const std::string& f : args->inputs) args->input += (args->input.empty() ? "" : " ") + f;
    std::fputs(report(*args).c_str(), stdout);
    exit_code = 0;
  });
}

}  // namespace latentlift::cli
