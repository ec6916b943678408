// The choice of the most-unstable parcel by its CAPE (src/column/most_unstable.hpp,
// METHODS "Parcels, free convection and the lift needed"): the largest CAPE among the
// flagged source-layer parcels, exact ties to the lowest level, and parcels bounded by
// another's CAPE never lifted. CAPE values here are given, not computed: the rule is
// checked apart from the ascents (tests/column/test_invariants.cpp checks it on columns).
#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <set>
#include <vector>

#include "column/most_unstable.hpp"

namespace latentlift {
namespace {

using detail::choose_most_unstable;
using detail::MuCandidate;

MuCandidate candidate(int position, double theta_w_k, double lcl_hpa) {
  return {position, theta_w_k, std::log(lcl_hpa * 100.0)};
}

TEST(MostUnstableChoice, NoCandidateChoosesNone) {
  std::vector<MuCandidate> none;
  EXPECT_EQ(choose_most_unstable(none, [](int) { return 1.0; }), -1);
}

TEST(MostUnstableChoice, LargestCapeWinsOverLargestThetaW) {
  // position 4: warmest parcel but a high LCL and little CAPE; position 0: more CAPE
  std::vector<MuCandidate> c = {candidate(0, 295.0, 950.0), candidate(4, 297.0, 700.0)};
  const double cape[] = {800.0, 0, 0, 0, 100.0};
  EXPECT_EQ(choose_most_unstable(c, [&](int k) { return cape[k]; }), 0);
}

TEST(MostUnstableChoice, ExactCapeTiesGoToTheLowestLevel) {
  // METHODS: exact ties go to the lowest level, whatever the order of visit
  std::vector<MuCandidate> c = {candidate(3, 298.0, 800.0), candidate(1, 296.0, 900.0),
                                candidate(2, 297.0, 850.0)};
  EXPECT_EQ(choose_most_unstable(c, [](int) { return 500.0; }), 1);
}

TEST(MostUnstableChoice, IdenticalParcelsChooseTheLowestAndLiftItAlone) {
  // Same theta_w and LCL: the same CAPE; the lowest is lifted, the other is bounded by it.
  std::vector<MuCandidate> c = {candidate(2, 296.0, 850.0), candidate(0, 296.0, 850.0)};
  std::set<int> lifted;
  EXPECT_EQ(choose_most_unstable(c, [&](int k) { lifted.insert(k); return 300.0; }), 0);
  EXPECT_EQ(lifted, std::set<int>{0});
}

TEST(MostUnstableChoice, ParcelColderWithHigherLclIsNotLifted) {
  // position 1 is colder than position 0 and saturates higher up: bounded by position 0
  std::vector<MuCandidate> c = {candidate(0, 297.0, 900.0), candidate(1, 296.5, 850.0)};
  std::set<int> lifted;
  EXPECT_EQ(choose_most_unstable(c, [&](int k) { lifted.insert(k); return k == 0 ? 50.0 : 40.0; }), 0);
  EXPECT_EQ(lifted, std::set<int>{0});
}

TEST(MostUnstableChoice, AgreesWithLiftingEveryParcelWhenCapeGrowsWithThetaWAndLcl) {
  // Any CAPE that grows with theta_w and with the LCL pressure (the bound's premise) and
  // ties often: the choice equals the largest CAPE over all parcels, lowest on ties.
  std::mt19937 rng(1313u);
  std::uniform_int_distribution<int> count(1, 14), theta_step(0, 6), lcl_step(0, 6);
  for (int trial = 0; trial < 20000; ++trial) {
    const int n = count(rng);
    std::vector<MuCandidate> c;
    std::vector<double> cape(static_cast<size_t>(n));
    for (int k = 0; k < n; ++k) {
      const double theta = 290.0 + 0.5 * theta_step(rng);  // coarse steps: many exact ties
      const double lcl = 700.0 + 50.0 * lcl_step(rng);
      c.push_back(candidate(k, theta, lcl));
      cape[static_cast<size_t>(k)] = std::floor(theta - 290.0) * 100.0 + std::floor((lcl - 700.0) / 100.0) * 60.0;
    }
    int expected = 0;
    for (int k = 1; k < n; ++k)
      if (cape[static_cast<size_t>(k)] > cape[static_cast<size_t>(expected)]) expected = k;
    const int got = choose_most_unstable(c, [&](int k) { return cape[static_cast<size_t>(k)]; });
    ASSERT_EQ(got, expected) << "trial " << trial;
  }
}

}  // namespace
}  // namespace latentlift
