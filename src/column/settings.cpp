#include "latentlift/settings.hpp"

#include <stdexcept>
#include <string>

namespace latentlift {

BuoyancyMode parse_buoyancy_mode(const char* text) {
  const std::string s(text);
  if (s == "virtual") return BuoyancyMode::virtual_temperature;
  if (s == "temperature") return BuoyancyMode::temperature;
  throw std::invalid_argument("buoyancy must be \"virtual\" or \"temperature\", not \"" + s + "\"");
}

const char* to_string(BuoyancyMode mode) {
  return mode == BuoyancyMode::virtual_temperature ? "virtual" : "temperature";
}

MuParcelRule parse_mu_parcel_rule(const char* text) {
  const std::string s(text);
  if (s == "max_cape") return MuParcelRule::max_cape;
  if (s == "max_theta_w") return MuParcelRule::max_theta_w;
  throw std::invalid_argument("mu_parcel must be \"max_cape\" or \"max_theta_w\", not \"" + s + "\"");
}

const char* to_string(MuParcelRule rule) { return rule == MuParcelRule::max_cape ? "max_cape" : "max_theta_w"; }

}  // namespace latentlift
