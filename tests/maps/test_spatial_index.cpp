// The k-d tree over the sphere finds the same nearest cell as a brute-force search.
#include <gtest/gtest.h>

#include <cmath>
#include <random>

#include "maps/spatial_index.hpp"

namespace latentlift::test {
namespace {

using maps::detail::SphereIndex;
using maps::detail::unit_vector;

double chord(double lon1, double lat1, double lon2, double lat2) {
  auto a = unit_vector(lon1, lat1), b = unit_vector(lon2, lat2);
  return std::sqrt((a[0] - b[0]) * (a[0] - b[0]) + (a[1] - b[1]) * (a[1] - b[1]) + (a[2] - b[2]) * (a[2] - b[2]));
}

TEST(SphereIndex, NearestCellMatchesBruteForce) {
  std::mt19937 random(11);
  std::uniform_real_distribution<double> lon(-180, 180), z(-1, 1);
  std::vector<double> lons, lats;
  for (int k = 0; k < 3000; ++k) {
    lons.push_back(lon(random));
    lats.push_back(std::asin(z(random)) * 180.0 / 3.14159265358979323846);
  }
  SphereIndex index(lons, lats);
  for (int q = 0; q < 500; ++q) {
    double qlon = lon(random), qlat = std::asin(z(random)) * 180.0 / 3.14159265358979323846;
    double best = 1e9;
    for (std::size_t k = 0; k < lons.size(); ++k) best = std::min(best, chord(qlon, qlat, lons[k], lats[k]));
    auto hit = index.nearest(qlon, qlat);
    EXPECT_NEAR(hit.chord, best, 1e-12);
    EXPECT_NEAR(chord(qlon, qlat, lons[hit.index], lats[hit.index]), best, 1e-12);
  }
}

TEST(SphereIndex, NearestAcrossTheDateLine) {
  SphereIndex index({179.9, -170.0, 0.0}, {10.0, 10.0, 10.0});
  EXPECT_EQ(index.nearest(-179.95, 10.0).index, 0u);
}

TEST(SphereIndex, TypicalSpacingOfARegularGridIsItsStep) {
  std::vector<double> lons, lats;
  for (int j = 0; j < 20; ++j)
    for (int i = 0; i < 20; ++i) {
      lons.push_back(i * 0.1);
      lats.push_back(j * 0.1);  // near the equator: 0.1 degree ~ 0.001745 on the unit sphere
    }
  SphereIndex index(lons, lats);
  EXPECT_NEAR(index.typical_spacing(), 0.1 * 3.14159265358979323846 / 180.0, 1e-6);
}

TEST(SphereIndex, MissingPositionsAreLeftOut) {
  SphereIndex index({std::nan(""), 5.0}, {0.0, 5.0});
  EXPECT_EQ(index.size(), 1u);
  EXPECT_EQ(index.nearest(0.0, 0.0).index, 1u);
}

}  // namespace
}  // namespace latentlift::test
