#include "io/units.hpp"

#include <udunits2.h>

#include <algorithm>
#include <cmath>

#include <memory>
#include <mutex>
#include <stdexcept>

namespace latentlift::io::detail {
namespace {

struct SystemDeleter {
  void operator()(ut_system* system) const { ut_free_system(system); }
};
struct UnitDeleter {
  void operator()(ut_unit* unit) const { ut_free(unit); }
};
struct ConverterDeleter {
  void operator()(cv_converter* converter) const { cv_free(converter); }
};
using UnitPtr = std::unique_ptr<ut_unit, UnitDeleter>;

std::mutex& units_mutex() {
  static std::mutex mutex;
  return mutex;
}

// The system unit database, read once (UDUNITS-2 is not thread-safe: callers hold units_mutex()).
ut_system* system_units() {
  static std::unique_ptr<ut_system, SystemDeleter> system = [] {
    ut_set_error_message_handler(ut_ignore);
    std::unique_ptr<ut_system, SystemDeleter> loaded(ut_read_xml(nullptr));
    if (!loaded) throw std::runtime_error("cannot read the UDUNITS-2 unit database");
    return loaded;
  }();
  return system.get();
}

UnitPtr parse(const std::string& text) {
  std::string normal = normalise_unit(text);
  return UnitPtr(ut_parse(system_units(), normal.c_str(), UT_UTF8));
}

}  // namespace

std::string normalise_unit(const std::string& text) {
  size_t first = text.find_first_not_of(" \t");
  size_t last = text.find_last_not_of(" \t");
  std::string trimmed = first == std::string::npos ? "" : text.substr(first, last - first + 1);
  if (trimmed == "gpm") return "m";
  if (trimmed == "mb") return "hPa";
  return trimmed;
}

UnitConverter::UnitConverter(const std::string& from, const std::string& to) {
  std::lock_guard<std::mutex> lock(units_mutex());
  UnitPtr from_unit = parse(from);
  if (!from_unit) throw std::invalid_argument("units '" + from + "' not understood by UDUNITS-2");
  UnitPtr to_unit = parse(to);
  if (!to_unit) throw std::invalid_argument("units '" + to + "' not understood by UDUNITS-2");
  if (!ut_are_convertible(from_unit.get(), to_unit.get()))
    throw std::invalid_argument("units '" + from + "' cannot be converted to '" + to + "'");
  std::unique_ptr<cv_converter, ConverterDeleter> converter(ut_get_converter(from_unit.get(), to_unit.get()));
  if (!converter) throw std::invalid_argument("no conversion from '" + from + "' to '" + to + "'");
  // Every conversion between the units used here is affine; sample it once so that the
  // hot loop needs no UDUNITS call (checked against a third point).
  offset_ = cv_convert_double(converter.get(), 0.0);
  scale_ = cv_convert_double(converter.get(), 1.0) - offset_;
  double probe = cv_convert_double(converter.get(), 1000.0);
  if (std::abs(probe - (scale_ * 1000.0 + offset_)) > 1e-9 * std::max(1.0, std::abs(probe)))
    throw std::invalid_argument("conversion from '" + from + "' to '" + to + "' is not linear");
}

UnitConverter::~UnitConverter() = default;

void UnitConverter::convert(double* values, std::size_t n) const {
  if (scale_ == 1.0 && offset_ == 0.0) return;
  for (std::size_t i = 0; i < n; ++i) values[i] = values[i] * scale_ + offset_;
}

double UnitConverter::convert(double value) const { return value * scale_ + offset_; }

bool convertible(const std::string& from, const std::string& to) {
  std::lock_guard<std::mutex> lock(units_mutex());
  UnitPtr from_unit = parse(from);
  UnitPtr to_unit = parse(to);
  return from_unit && to_unit && ut_are_convertible(from_unit.get(), to_unit.get());
}

}  // namespace latentlift::io::detail
