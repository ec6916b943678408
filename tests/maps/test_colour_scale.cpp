// latentlift's colour scales checked by an independent colour library (colorspacious, Debian
// python3-colorspacious: CIELAB per CIE 1976, colour-vision deficiencies simulated per Machado,
// Oliveira and Fernandes 2009) through tests/maps/check_colour_scale.py, one property per test.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <string>

#include "maps/colour_scale.hpp"
#include "support/test_support.hpp"

namespace latentlift::test {
namespace {

using maps::detail::Rgb;

// The colours the checks look at, written once per test run.
std::string colours_file() {
  static const std::string path = [] {
    std::string p = scratch_dir("maps_colour_scale") + "/colours.txt";
    std::ofstream out(p);
    auto put = [&](const char* kind, Rgb c) { out << kind << ' ' << int(c[0]) << ' ' << int(c[1]) << ' ' << int(c[2]) << '\n'; };
    for (int k = 0; k < 256; ++k) put("seq256", maps::detail::sequential_colour(k / 255.0));
    for (Rgb c : maps::detail::sequential_steps(12)) put("bar12", c);
    for (int k = 0; k < 10; ++k) put("category", maps::detail::category_colour(k));
    put("not_applicable", maps::detail::not_applicable_colour());
    return p;
  }();
  return path;
}

CommandResult check(const std::string& name) {
  return run_command(python() + " " + test_dir() + "/maps/check_colour_scale.py " + colours_file() + " " + name);
}

TEST(ColourScale, LightnessRisesMonotonicallyFromDarkToLight) {
  auto r = check("lightness_monotonic");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, NeighbouringStepsDifferByEqualColourDifferencesWithinEightPercent) {
  auto r = check("equal_steps");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, StepsStayApartInGrey) {
  auto r = check("readable_in_grey");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, StepsStayApartUnderSimulatedColourVisionDeficiencies) {
  auto r = check("colour_vision_deficiencies");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, ClassColoursAndNotApplicableStayDistinctUnderDeficiencies) {
  auto r = check("classes_distinct");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, UnlikeTheFamousDefaultColourMaps) {
  auto r = check("unlike_famous_defaults");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

TEST(ColourScale, NiceBinsCoverTheRangeWithRoundEdges) {
  auto bins = maps::detail::nice_bins(503.2, 1496.7);
  EXPECT_LE(bins.low, 503.2);
  EXPECT_GE(bins.high(), 1496.7);
  EXPECT_LE(bins.count, 16);
  EXPECT_DOUBLE_EQ(bins.step, 100.0);
  EXPECT_DOUBLE_EQ(bins.low, 500.0);
}

TEST(ColourScale, PercentileInterpolatesBetweenOrderStatistics) {
  // Hyndman and Fan (1996) definition 7 (NumPy's default): the 2nd percentile of 0..100 is 2, of
  // {0, 10} it is 0.2; NaN values are left out.
  std::vector<double> ramp;
  for (int k = 0; k <= 100; ++k) ramp.push_back(k);
  EXPECT_NEAR(maps::detail::percentile(ramp, 2.0), 2.0, 1e-12);
  EXPECT_NEAR(maps::detail::percentile({10.0, std::nan(""), 0.0}, 2.0), 0.2, 1e-12);
}

}  // namespace
}  // namespace latentlift::test
