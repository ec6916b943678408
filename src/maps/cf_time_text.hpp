// Internal: CF time coordinates as text for map titles and GeoTIFF metadata (CF 1.8 sec. 4.4;
// standard, gregorian and proleptic_gregorian calendars).
#pragma once

#include <optional>
#include <string>

namespace latentlift::maps::detail {

/// Seconds since 1970-01-01 00:00 UTC of a time value in CF units ("hours since 2011-01-10 12:00");
/// nullopt for other calendars or units that are not a time since a date.
std::optional<double> unix_seconds(double value, const std::string& units, const std::string& calendar);
/// "2011-01-15 12:00 UTC", or "time <value> <units>" when the value cannot be decoded.
std::string format_time(double value, const std::string& units, const std::string& calendar);
/// ISO 8601 "2011-01-15T12:00:00Z", or "" when the value cannot be decoded.
std::string iso_time(double value, const std::string& units, const std::string& calendar);

}  // namespace latentlift::maps::detail
