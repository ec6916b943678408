// CF time units ("<unit> since <date>") and the grouping of valid times.
// Calendar arithmetic: H. Hinnant, "chrono-Compatible Low-Level Date Algorithms"
// (days_from_civil / civil_from_days, proleptic Gregorian).
#include <cctype>
#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "latentlift/climatology.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::climatology {

std::int64_t days_from_civil(int year, int month, int day) {
  const std::int64_t y = static_cast<std::int64_t>(year) - (month <= 2 ? 1 : 0);
  const std::int64_t era = (y >= 0 ? y : y - 399) / 400;
  const std::int64_t yoe = y - era * 400;
  const std::int64_t doy = (153 * (month + (month > 2 ? -3 : 9)) + 2) / 5 + day - 1;
  const std::int64_t doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + doe - 719468;
}

void civil_from_days(std::int64_t days, int& year, int& month, int& day) {
  days += 719468;
  const std::int64_t era = (days >= 0 ? days : days - 146096) / 146097;
  const std::int64_t doe = days - era * 146097;
  const std::int64_t yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
  const std::int64_t doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
  const std::int64_t mp = (5 * doy + 2) / 153;
  day = static_cast<int>(doy - (153 * mp + 2) / 5 + 1);
  month = static_cast<int>(mp < 10 ? mp + 3 : mp - 9);
  year = static_cast<int>(yoe + era * 400 + (month <= 2 ? 1 : 0));
}

std::string iso8601(std::int64_t time_s) {
  std::int64_t days = time_s >= 0 ? time_s / 86400 : -((-time_s + 86399) / 86400);
  std::int64_t sod = time_s - days * 86400;
  int y, m, d;
  civil_from_days(days, y, m, d);
  char text[40];
  std::snprintf(text, sizeof text, "%04d-%02d-%02dT%02d:%02d:%02dZ", y, m, d,
                static_cast<int>(sod / 3600), static_cast<int>(sod / 60 % 60), static_cast<int>(sod % 60));
  return text;
}

namespace {

std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

std::string trim(const std::string& s) {
  size_t a = s.find_first_not_of(" \t\n");
  size_t b = s.find_last_not_of(" \t\n");
  return a == std::string::npos ? std::string() : s.substr(a, b - a + 1);
}

// Parses an unsigned integer at text[pos]; advances pos.
bool read_int(const std::string& text, size_t& pos, int& value) {
  size_t start = pos;
  value = 0;
  while (pos < text.size() && std::isdigit(static_cast<unsigned char>(text[pos]))) {
    value = value * 10 + (text[pos] - '0');
    ++pos;
  }
  return pos > start;
}

}  // namespace

TimeUnits parse_time_units(const std::string& units_text, const std::string& calendar_text) {
  const std::string units = trim(units_text);
  const std::string calendar = lower(trim(calendar_text.empty() ? "standard" : calendar_text));
  const bool proleptic = calendar == "proleptic_gregorian";
  if (!proleptic && calendar != "standard" && calendar != "gregorian")
    throw std::invalid_argument("calendar '" + calendar_text +
                                "' is not supported (expected standard, gregorian or proleptic_gregorian)");
  const size_t since = lower(units).find(" since ");
  if (since == std::string::npos)
    throw std::invalid_argument("time units '" + units_text + "' are not of the form '<unit> since <date>'");
  const std::string unit = lower(trim(units.substr(0, since)));
  TimeUnits result;
  if (unit == "seconds" || unit == "second" || unit == "secs" || unit == "sec" || unit == "s")
    result.seconds_per_unit = 1.0;
  else if (unit == "minutes" || unit == "minute" || unit == "mins" || unit == "min")
    result.seconds_per_unit = 60.0;
  else if (unit == "hours" || unit == "hour" || unit == "hrs" || unit == "hr" || unit == "h")
    result.seconds_per_unit = 3600.0;
  else if (unit == "days" || unit == "day" || unit == "d")
    result.seconds_per_unit = 86400.0;
  else
    throw std::invalid_argument("time unit '" + unit + "' is not seconds, minutes, hours or days");

  const std::string date = trim(units.substr(since + 7));
  size_t pos = 0;
  int year = 0, month = 1, day = 1, hour = 0, minute = 0, second = 0;
  bool negative_year = false;
  if (pos < date.size() && date[pos] == '-') { negative_year = true; ++pos; }
  bool ok = read_int(date, pos, year) && pos < date.size() && date[pos++] == '-' &&
            read_int(date, pos, month) && pos < date.size() && date[pos++] == '-' && read_int(date, pos, day);
  if (!ok) throw std::invalid_argument("reference date in '" + units_text + "' is not YYYY-MM-DD");
  if (negative_year) year = -year;
  if (pos < date.size() && (date[pos] == 'T' || date[pos] == ' ')) {
    ++pos;
    while (pos < date.size() && date[pos] == ' ') ++pos;
    if (pos < date.size() && std::isdigit(static_cast<unsigned char>(date[pos]))) {
      ok = read_int(date, pos, hour);
      if (ok && pos < date.size() && date[pos] == ':') {
        ++pos;
        ok = read_int(date, pos, minute);
        if (ok && pos < date.size() && date[pos] == ':') {
          ++pos;
          ok = read_int(date, pos, second);
          if (ok && pos < date.size() && date[pos] == '.') {  // fractional seconds: must be zero
            ++pos;
            int frac = 0;
            read_int(date, pos, frac);
            if (frac != 0) throw std::invalid_argument("fractional seconds in '" + units_text + "' are not supported");
          }
        }
      }
      if (!ok) throw std::invalid_argument("reference time in '" + units_text + "' is not hh:mm:ss");
    }
  }
  // Time zone: Z, UTC, or +hh[:mm] / -hh[:mm].
  while (pos < date.size() && date[pos] == ' ') ++pos;
  int offset_s = 0;
  if (pos < date.size()) {
    std::string zone = trim(date.substr(pos));
    if (zone == "Z" || lower(zone) == "utc" || lower(zone) == "gmt") {
      // UTC
    } else if (zone[0] == '+' || zone[0] == '-') {
      size_t zpos = 1;
      int zh = 0, zm = 0;
      if (!read_int(zone, zpos, zh)) throw std::invalid_argument("time zone in '" + units_text + "' is malformed");
      if (zh >= 100) { zm = zh % 100; zh /= 100; }  // +hhmm
      else if (zpos < zone.size() && zone[zpos] == ':') { ++zpos; read_int(zone, zpos, zm); }
      if (zpos != zone.size()) throw std::invalid_argument("time zone in '" + units_text + "' is malformed");
      offset_s = (zone[0] == '-' ? -1 : 1) * (zh * 3600 + zm * 60);
    } else {
      throw std::invalid_argument("unexpected text '" + zone + "' after the reference date in '" + units_text + "'");
    }
  }
  if (month < 1 || month > 12 || day < 1 || day > 31 || hour > 24 || minute > 59 || second > 60)
    throw std::invalid_argument("reference date in '" + units_text + "' is out of range");
  if (!proleptic && days_from_civil(year, month, day) < days_from_civil(1582, 10, 15))
    throw std::invalid_argument("reference date in '" + units_text +
                                "' lies before 1582-10-15, where the standard calendar is mixed Julian/Gregorian");
  result.epoch_s = days_from_civil(year, month, day) * 86400 + hour * 3600 + minute * 60 + second - offset_s;
  return result;
}

GroupBy parse_group_by(const std::string& text) {
  if (text == "all") return GroupBy::all;
  if (text == "month") return GroupBy::month;
  if (text == "season") return GroupBy::season;
  if (text == "hour") return GroupBy::hour;
  throw UsageError("--group: expected all, month, season or hour, got '" + text + "'");
}

const char* to_string(GroupBy group_by) {
  switch (group_by) {
    case GroupBy::all: return "all";
    case GroupBy::month: return "month";
    case GroupBy::season: return "season";
    case GroupBy::hour: return "hour";
  }
  return "all";
}

int group_count(GroupBy group_by) {
  switch (group_by) {
    case GroupBy::all: return 1;
    case GroupBy::month: return 12;
    case GroupBy::season: return 4;
    case GroupBy::hour: return 24;
  }
  return 1;
}

std::vector<std::string> group_labels(GroupBy group_by) {
  static const char* months[] = {"Jan", "Feb", "Mar", "Apr", "May", "Jun",
                                 "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"};
  std::vector<std::string> labels;
  switch (group_by) {
    case GroupBy::all: labels = {"all"}; break;
    case GroupBy::month: labels.assign(months, months + 12); break;
    case GroupBy::season: labels = {"DJF", "MAM", "JJA", "SON"}; break;
    case GroupBy::hour:
      for (int h = 0; h < 24; ++h) {
        char text[8];
        std::snprintf(text, sizeof text, "%02dUTC", h);
        labels.emplace_back(text);
      }
      break;
  }
  return labels;
}

int group_index(GroupBy group_by, std::int64_t t) {
  const std::int64_t days = t >= 0 ? t / 86400 : -((-t + 86399) / 86400);
  if (group_by == GroupBy::all) return 0;
  if (group_by == GroupBy::hour) return static_cast<int>((t - days * 86400) / 3600);
  int y, m, d;
  civil_from_days(days, y, m, d);
  if (group_by == GroupBy::month) return m - 1;
  return (m % 12) / 3;  // Dec, Jan, Feb -> 0 (DJF); Mar-May -> 1; Jun-Aug -> 2; Sep-Nov -> 3
}

}  // namespace latentlift::climatology
