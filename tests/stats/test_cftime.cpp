// CF time units and the grouping of valid times.
#include <gtest/gtest.h>

#include "latentlift/climatology.hpp"

namespace cl = latentlift::climatology;

TEST(CfTime, DaysFromCivilMatchesKnownEpochs) {
  // 2000-01-01 is day 10957 of the Unix epoch; 1582-10-15 is day -141427 (proleptic Gregorian;
  // both are common practice, e.g. POSIX time 946684800 = 2000-01-01T00:00:00Z).
  EXPECT_EQ(cl::days_from_civil(1970, 1, 1), 0);
  EXPECT_EQ(cl::days_from_civil(2000, 1, 1), 10957);
  EXPECT_EQ(cl::days_from_civil(1582, 10, 15), -141427);
  EXPECT_EQ(cl::days_from_civil(2000, 3, 1) - cl::days_from_civil(2000, 2, 28), 2);  // 2000 is a leap year
  EXPECT_EQ(cl::days_from_civil(1900, 3, 1) - cl::days_from_civil(1900, 2, 28), 1);  // 1900 is not
}

TEST(CfTime, CivilFromDaysInvertsDaysFromCivil) {
  for (std::int64_t d = -200000; d < 200000; d += 997) {
    int y, m, dd;
    cl::civil_from_days(d, y, m, dd);
    EXPECT_EQ(cl::days_from_civil(y, m, dd), d);
  }
}

TEST(CfTime, HoursSinceADateDecode) {
  auto u = cl::parse_time_units("hours since 1900-01-01 00:00:00.0");
  EXPECT_EQ(u.seconds_per_unit, 3600.0);
  // ERA5-style: hours since 1900-01-01; 1,000,000 h later is 2014-01-29T16:00Z (POSIX arithmetic)
  EXPECT_EQ(u.epoch_s + 1000000LL * 3600, cl::days_from_civil(2014, 1, 29) * 86400 + 16 * 3600);
}

TEST(CfTime, ISOSeparatorAndTimeZoneAreHonoured) {
  auto utc = cl::parse_time_units("seconds since 2020-06-01T12:00:00Z");
  auto plus2 = cl::parse_time_units("seconds since 2020-06-01 14:00:00 +02:00");
  EXPECT_EQ(utc.epoch_s, plus2.epoch_s);
  auto date_only = cl::parse_time_units("days since 2020-06-01");
  EXPECT_EQ(date_only.epoch_s, utc.epoch_s - 12 * 3600);
}

TEST(CfTime, UnsupportedCalendarsAndUnitsAreRefused) {
  EXPECT_THROW(cl::parse_time_units("days since 2000-01-01", "noleap"), std::invalid_argument);
  EXPECT_THROW(cl::parse_time_units("days since 2000-01-01", "360_day"), std::invalid_argument);
  EXPECT_THROW(cl::parse_time_units("months since 2000-01-01"), std::invalid_argument);
  EXPECT_THROW(cl::parse_time_units("days"), std::invalid_argument);
  EXPECT_THROW(cl::parse_time_units("days since 1500-01-01", "standard"), std::invalid_argument);
  EXPECT_NO_THROW(cl::parse_time_units("days since 1500-01-01", "proleptic_gregorian"));
}

TEST(Grouping, SeasonsAreMeteorological) {
  auto t = [](int y, int m) { return cl::days_from_civil(y, m, 15) * 86400; };
  EXPECT_EQ(cl::group_index(cl::GroupBy::season, t(2001, 12)), 0);  // DJF
  EXPECT_EQ(cl::group_index(cl::GroupBy::season, t(2001, 2)), 0);
  EXPECT_EQ(cl::group_index(cl::GroupBy::season, t(2001, 3)), 1);   // MAM
  EXPECT_EQ(cl::group_index(cl::GroupBy::season, t(2001, 8)), 2);   // JJA
  EXPECT_EQ(cl::group_index(cl::GroupBy::season, t(2001, 11)), 3);  // SON
}

TEST(Grouping, HoursAreUtcHoursOfTheValidTime) {
  EXPECT_EQ(cl::group_index(cl::GroupBy::hour, 946684800 + 18 * 3600 + 59 * 60), 18);
  EXPECT_EQ(cl::group_index(cl::GroupBy::hour, -3600), 23);  // 1969-12-31T23:00Z
}

TEST(Grouping, LabelsNameEveryGroup) {
  EXPECT_EQ(cl::group_labels(cl::GroupBy::season)[2], "JJA");
  EXPECT_EQ(cl::group_labels(cl::GroupBy::month).size(), 12u);
  EXPECT_EQ(cl::group_labels(cl::GroupBy::hour)[6], "06UTC");
  EXPECT_EQ(cl::iso8601(946684800 + 3661), "2000-01-01T01:01:01Z");
}
