// Configuration: defaults, TOML file, --set overrides (toml++), validated key by key.
#include "latentlift/config.hpp"
#include "latentlift/pseudoadiabat.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <toml++/toml.h>

#include "latentlift/errors.hpp"

namespace latentlift {
namespace {

constexpr double kPaPerHpa = 100.0;

const std::vector<std::string>& quantity_keys() {
  static const std::vector<std::string> keys = {
      "air_temperature",       "specific_humidity", "relative_humidity",  "dew_point_temperature",
      "humidity_mixing_ratio", "geopotential",      "geopotential_height", "surface_air_pressure",
      "surface_altitude",      "surface_geopotential"};
  return keys;
}

/// Default aliases (short names common in model and reanalysis output; config/default.toml).
InputAliases default_aliases() {
  return {{"air_temperature", {"t", "T", "ta", "TMP", "temp", "air_temperature"}},
          {"specific_humidity", {"q", "Q", "hus", "SPFH", "shum"}},
          {"relative_humidity", {"r", "R", "hur", "RH", "rh", "rhum"}},
          {"dew_point_temperature", {"td", "Td", "DPT", "dpt", "dewpt"}},
          {"humidity_mixing_ratio", {"mr", "MIXR", "qv", "QVAPOR"}},
          {"geopotential", {"z", "Z", "phi", "geopotential"}},
          {"geopotential_height", {"gh", "zg", "HGT", "hgt", "geopotential_height"}},
          {"surface_air_pressure", {"sp", "ps", "PRES", "PSFC", "surface_pressure"}},
          {"surface_altitude", {"orog", "orography", "zs", "HGT_surface"}},
          {"surface_geopotential", {"fis", "phis", "z_surface"}}};
}

double number(const toml::node& node, const std::string& key) {
  if (auto v = node.value<double>()) return *v;
  throw UsageError("config key " + key + ": expected a number");
}

double positive_hpa(const toml::node& node, const std::string& key, double max_hpa) {
  double value = number(node, key);
  if (!(value > 0.0 && value <= max_hpa))
    throw UsageError("config key " + key + ": expected a pressure in hPa above 0 and at most " +
                     std::to_string(static_cast<int>(max_hpa)) + ", got " + std::to_string(value));
  return value * kPaPerHpa;
}

long integer(const toml::node& node, const std::string& key, long lo, long hi) {
  auto v = node.value<int64_t>();
  if (!v || !node.is_integer()) throw UsageError("config key " + key + ": expected an integer");
  if (*v < lo || *v > hi)
    throw UsageError("config key " + key + ": expected " + std::to_string(lo) + " to " + std::to_string(hi) +
                     ", got " + std::to_string(*v));
  return static_cast<long>(*v);
}

/// Apply one key of a parsed table to the config.
void apply(RunConfig& config, const std::string& section, const std::string& key, const toml::node& node) {
  const std::string full = section + "." + key;
  if (section == "analysis") {
    if (key == "buoyancy") {
      auto text = node.value<std::string>();
      if (!text || (*text != "virtual" && *text != "temperature"))
        throw UsageError("config key " + full + ": expected \"virtual\" or \"temperature\"");
      config.analysis.buoyancy = parse_buoyancy_mode(text->c_str());
    } else if (key == "top_pressure_hpa") {
      config.analysis.top_pressure_pa = positive_hpa(node, full, 1100.0);
      // The pseudo-adiabat tables reach up to 10 hPa (include/latentlift/pseudoadiabat.hpp).
      if (config.analysis.top_pressure_pa < pseudoadiabat::Table::kPressureMinPa)
        throw UsageError("config key " + full + ": expected a pressure from 10 to 1100 hPa (the tables end at 10 hPa)");
    } else if (key == "source_layer_hpa") {
      config.analysis.source_layer_pa = positive_hpa(node, full, 1100.0);
    } else if (key == "min_excess_k") {
      double value = number(node, full);
      if (!(value >= 0.0 && value < 50.0))
        throw UsageError("config key " + full + ": expected a temperature excess in K from 0 to 50");
      config.analysis.min_excess_k = value;
    } else if (key == "mu_parcel") {
      auto text = node.value<std::string>();
      if (!text || (*text != "max_cape" && *text != "max_theta_w"))
        throw UsageError("config key " + full + ": expected \"max_cape\" or \"max_theta_w\"");
      config.analysis.mu_parcel = parse_mu_parcel_rule(text->c_str());
    } else {
      throw UsageError("unknown config key " + full);
    }
  } else if (section == "input" && key == "require_surface_pressure") {
    auto value = node.value<bool>();
    if (!value || !node.is_boolean()) throw UsageError("config key " + full + ": expected true or false");
    config.conventions.require_surface_pressure = *value;
  } else if (section == "input" && key == "relative_humidity_over") {
    auto text = node.value<std::string>();
    if (text && *text == "water")
      config.conventions.relative_humidity_over = thermo::SaturationReference::water;
    else if (text && *text == "ice_below_freezing")
      config.conventions.relative_humidity_over = thermo::SaturationReference::ice_below_freezing;
    else if (text && *text == "mixed")
      config.conventions.relative_humidity_over = thermo::SaturationReference::mixed;
    else
      throw UsageError("config key " + full + ": expected \"water\", \"ice_below_freezing\" or \"mixed\"");
  } else if (section == "input" && (key == "mixed_phase_cold_k" || key == "mixed_phase_warm_k")) {
    const double value = number(node, full);
    if (!(value >= 200.0 && value <= 273.16))
      throw UsageError("config key " + full + ": expected a temperature in K from 200 to 273.16");
    (key == "mixed_phase_cold_k" ? config.conventions.mixed_phase.cold_k : config.conventions.mixed_phase.warm_k) = value;
  } else if (section == "input" && key == "mixed_phase_exponent") {
    const double value = number(node, full);
    if (!(value > 0.0 && value <= 4.0)) throw UsageError("config key " + full + ": expected a number above 0, at most 4");
    config.conventions.mixed_phase.exponent = value;
  } else if (section == "input") {
    if (std::find(quantity_keys().begin(), quantity_keys().end(), key) == quantity_keys().end())
      throw UsageError("unknown config key " + full + " (quantities: air_temperature, specific_humidity, "
                       "relative_humidity, dew_point_temperature, humidity_mixing_ratio, geopotential, "
                       "geopotential_height, surface_air_pressure, surface_altitude, surface_geopotential; "
                       "also require_surface_pressure, relative_humidity_over, mixed_phase_cold_k, "
                       "mixed_phase_warm_k, mixed_phase_exponent)");
    std::vector<std::string> names;
    if (auto text = node.value<std::string>()) {
      names.push_back(*text);
    } else if (const toml::array* array = node.as_array()) {
      for (const toml::node& item : *array) {
        auto name = item.value<std::string>();
        if (!name) throw UsageError("config key " + full + ": expected a list of variable names");
        names.push_back(*name);
      }
    } else {
      throw UsageError("config key " + full + ": expected a list of variable names");
    }
    config.aliases[key] = names;
    if (std::find(config.conventions.chosen_quantities.begin(), config.conventions.chosen_quantities.end(), key) == config.conventions.chosen_quantities.end())
      config.conventions.chosen_quantities.push_back(key);
  } else if (section == "run") {
    if (key == "block_columns")
      config.block_columns = static_cast<std::size_t>(integer(node, full, 1, 100000000));
    else if (key == "threads")
      config.threads = static_cast<int>(integer(node, full, 0, 4096));
    else
      throw UsageError("unknown config key " + full);
  } else if (section == "output") {
    if (key == "deflate_level")
      config.deflate_level = static_cast<int>(integer(node, full, 0, 9));
    else
      throw UsageError("unknown config key " + full);
  } else {
    throw UsageError("unknown config section [" + section + "] (key " + full + ")");
  }
}

void apply_table(RunConfig& config, const toml::table& table, const std::string& origin) {
  for (const auto& [section_key, section_node] : table) {
    const std::string section(section_key.str());
    const toml::table* section_table = section_node.as_table();
    if (!section_table)
      throw UsageError(origin + ": config key " + section + ": expected a [section] (analysis, input, run, output)");
    for (const auto& [key, node] : *section_table) apply(config, section, std::string(key.str()), node);
  }
}

}  // namespace

RunConfig load_config(const std::string& config_path, const std::vector<std::string>& overrides) {
  RunConfig config;
  config.aliases = default_aliases();
  if (!config_path.empty()) {
    std::ifstream in(config_path);
    if (!in) throw UsageError(config_path + ": cannot read the config file");
    std::stringstream text;
    text << in.rdbuf();
    toml::table table;
    try {
      table = toml::parse(text.str(), config_path);
    } catch (const toml::parse_error& e) {
      throw UsageError(config_path + ": not valid TOML at line " + std::to_string(e.source().begin.line) + ": " +
                       std::string(e.description()));
    }
    apply_table(config, table, config_path);
  }
  for (const std::string& item : overrides) {
    std::size_t eq = item.find('=');
    std::size_t dot = item.find('.');
    if (eq == std::string::npos || dot == std::string::npos || dot > eq)
      throw UsageError("--set " + item + ": expected section.key=value");
    const std::string section = item.substr(0, dot);
    const std::string key = item.substr(dot + 1, eq - dot - 1);
    const std::string value = item.substr(eq + 1);
    toml::table parsed;
    try {  // a TOML value (number, "string", [list]); a bare word is taken as a string
      parsed = toml::parse("v = " + value);
    } catch (const toml::parse_error&) {
      parsed = toml::table{{"v", value}};
    }
    apply(config, section, key, *parsed.get("v"));
  }
  if (config.analysis.source_layer_pa <= 0.0) throw UsageError("config key analysis.source_layer_hpa: must be positive");
  if (!(config.conventions.mixed_phase.cold_k < config.conventions.mixed_phase.warm_k))
    throw UsageError("config keys input.mixed_phase_cold_k and input.mixed_phase_warm_k: expected cold below warm");
  return config;
}

std::string config_to_toml(const RunConfig& config) {
  std::ostringstream out;
  out << "[analysis]\nbuoyancy = \"" << to_string(config.analysis.buoyancy) << "\"\ntop_pressure_hpa = "
      << config.analysis.top_pressure_pa / kPaPerHpa << "\nsource_layer_hpa = " << config.analysis.source_layer_pa / kPaPerHpa
      << "\nmin_excess_k = " << config.analysis.min_excess_k << "\nmu_parcel = \"" << to_string(config.analysis.mu_parcel)
      << "\"\n\n[input]\n";
  for (const auto& [quantity, names] : config.aliases) {
    out << quantity << " = [";
    for (std::size_t i = 0; i < names.size(); ++i) out << (i ? ", " : "") << '"' << names[i] << '"';
    out << "]\n";
  }
  const char* over[] = {"water", "ice_below_freezing", "mixed"};
  out << "require_surface_pressure = " << (config.conventions.require_surface_pressure ? "true" : "false")
      << "\nrelative_humidity_over = \"" << over[static_cast<int>(config.conventions.relative_humidity_over)]
      << "\"\nmixed_phase_cold_k = " << config.conventions.mixed_phase.cold_k
      << "\nmixed_phase_warm_k = " << config.conventions.mixed_phase.warm_k
      << "\nmixed_phase_exponent = " << config.conventions.mixed_phase.exponent << "\n";
  out << "\n[run]\nblock_columns = " << config.block_columns << "\nthreads = " << config.threads
      << "\n\n[output]\ndeflate_level = " << config.deflate_level << "\n";
  return out.str();
}

}  // namespace latentlift
