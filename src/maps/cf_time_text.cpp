// CF time values as calendar text (proleptic Gregorian; the well-known civil-from-days algorithm).
#include "maps/cf_time_text.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace latentlift::maps::detail {

namespace {

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

}  // namespace

std::optional<double> unix_seconds(double value, const std::string& units, const std::string& calendar) {
  if (!(calendar.empty() || calendar == "standard" || calendar == "gregorian" || calendar == "proleptic_gregorian"))
    return std::nullopt;
  auto since = units.find(" since ");
  if (since == std::string::npos || !std::isfinite(value)) return std::nullopt;
  std::string unit = units.substr(0, since);
  double seconds_per_unit = 0;
  if (unit == "seconds" || unit == "second" || unit == "s" || unit == "sec") seconds_per_unit = 1;
  else if (unit == "minutes" || unit == "minute" || unit == "min") seconds_per_unit = 60;
  else if (unit == "hours" || unit == "hour" || unit == "h" || unit == "hr") seconds_per_unit = 3600;
  else if (unit == "days" || unit == "day" || unit == "d") seconds_per_unit = 86400;
  else return std::nullopt;
  int year = 0, month = 0, day = 0, hour = 0, minute = 0;
  double second = 0;
  std::string reference = units.substr(since + 7);
  std::replace(reference.begin(), reference.end(), 'T', ' ');
  int fields = std::sscanf(reference.c_str(), "%d-%d-%d %d:%d:%lf", &year, &month, &day, &hour, &minute, &second);
  if (fields < 3 || month < 1 || month > 12 || day < 1 || day > 31) return std::nullopt;
  return static_cast<double>(days_from_civil(year, month, day)) * 86400.0 + hour * 3600.0 + minute * 60.0 + second +
         value * seconds_per_unit;
}

namespace {

// Date and time of day (rounded to the second) of seconds since 1970.
void split_time(double total, long long& y, unsigned& m, unsigned& d, long long& rest) {
  long long whole_days = static_cast<long long>(std::floor(total / 86400.0));
  rest = std::llround(total - static_cast<double>(whole_days) * 86400.0);
  if (rest >= 86400) {
    ++whole_days;
    rest -= 86400;
  }
  civil_from_days(whole_days, y, m, d);
}

}  // namespace

std::string format_time(double value, const std::string& units, const std::string& calendar) {
  auto total = unix_seconds(value, units, calendar);
  if (!total) {
    char raw[96];
    std::snprintf(raw, sizeof raw, "time %g %s", value, units.c_str());
    return raw;
  }
  long long y, rest;
  unsigned m, d;
  split_time(*total, y, m, d, rest);
  char text[64];
  std::snprintf(text, sizeof text, "%04lld-%02u-%02u %02lld:%02lld UTC", y, m, d, rest / 3600, (rest / 60) % 60);
  return text;
}

std::string iso_time(double value, const std::string& units, const std::string& calendar) {
  auto total = unix_seconds(value, units, calendar);
  if (!total) return "";
  long long y, rest;
  unsigned m, d;
  split_time(*total, y, m, d, rest);
  char text[64];
  std::snprintf(text, sizeof text, "%04lld-%02u-%02uT%02lld:%02lld:%02lldZ", y, m, d, rest / 3600, (rest / 60) % 60, rest % 60);
  return text;
}

}  // namespace latentlift::maps::detail
