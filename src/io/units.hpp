// Internal to src/io: unit conversion with UDUNITS-2 (system database loaded once).
#pragma once

#include <cstddef>
#include <memory>
#include <string>

namespace latentlift::io::detail {

/// A linear or affine conversion between two unit strings; shareable across threads once built.
class UnitConverter {
 public:
  /// Converter from `from` to `to`; throws std::invalid_argument with a reason when
  /// either string does not parse or the units are not convertible.
  UnitConverter(const std::string& from, const std::string& to);
  ~UnitConverter();
  UnitConverter(const UnitConverter&) = delete;
  UnitConverter& operator=(const UnitConverter&) = delete;
  void convert(double* values, std::size_t n) const;
  double convert(double value) const;

 private:
  double scale_ = 1.0, offset_ = 0.0;  // to = scale * from + offset (all supported conversions are affine)
};

/// True when unit string `from` parses and converts to `to`.
bool convertible(const std::string& from, const std::string& to);

/// Unit strings of the trade that UDUNITS-2 reads differently: "gpm" (geopotential metre) -> "m",
/// "mb" (millibar in meteorology, millibarn in UDUNITS) -> "hPa" (common practice).
std::string normalise_unit(const std::string& text);

}  // namespace latentlift::io::detail
