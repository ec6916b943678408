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

}  // namespace latentlift
