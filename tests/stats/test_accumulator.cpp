// Accumulators: single pass, merges, variance and histogram percentiles.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <numeric>
#include <random>

#include "latentlift/climatology.hpp"

namespace cl = latentlift::climatology;

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr int kCape = 1;  // index of mu_cape in field_specs()

// A deterministic series of time steps on n_points points with every field set to the
// same values (class 2 where CAPE > 100, 1 where CAPE > 0, else 0; CAPE NaN at every 7th).
struct Series {
  std::vector<std::int64_t> times;
  std::vector<std::vector<double>> values;        // [step][point]
  std::vector<std::vector<std::int8_t>> classes;  // [step][point]
};

Series make_series(int steps, int points, unsigned seed) {
  std::mt19937 rng(seed);
  std::gamma_distribution<double> cape(0.8, 600.0);
  Series s;
  for (int t = 0; t < steps; ++t) {
    s.times.push_back(946684800 + 6 * 3600 * static_cast<std::int64_t>(t));  // 2000-01-01, 6-hourly
    std::vector<double> v(points);
    std::vector<std::int8_t> c(points);
    for (int p = 0; p < points; ++p) {
      v[p] = (t + p) % 5 == 0 ? 0.0 : cape(rng);
      if ((t * points + p) % 7 == 3) v[p] = kNaN;
      c[p] = std::isnan(v[p]) ? 0 : v[p] > 100 ? 2 : v[p] > 0 ? 1 : 0;
    }
    s.values.push_back(v);
    s.classes.push_back(c);
  }
  return s;
}

void add_steps(cl::Accumulator& acc, const Series& s, int begin, int end) {
  for (int t = begin; t < end; ++t) {
    cl::TimeStepFields step;
    step.valid_time_s = s.times[t];
    for (int f = 0; f < cl::kFieldCount; ++f) step.field[f] = s.values[t].data();
    step.latent_class = s.classes[t].data();
    acc.add(step);
  }
}

}  // namespace

TEST(Accumulator, MergeOfTwoHalvesEqualsOnePass) {
  const int points = 17, steps = 40;
  Series s = make_series(steps, points, 7);
  cl::Accumulator whole(cl::GroupBy::season, points, 0), a(cl::GroupBy::season, points, 0),
      b(cl::GroupBy::season, points, 0);
  add_steps(whole, s, 0, steps);
  add_steps(a, s, 0, 13);
  add_steps(b, s, 13, steps);
  a.merge(b);
  EXPECT_EQ(a.count, whole.count);
  EXPECT_EQ(a.latent_count, whole.latent_count);
  EXPECT_EQ(a.real_latent_count, whole.real_latent_count);
  for (int f = 0; f < cl::kFieldCount; ++f) {
    EXPECT_EQ(a.n[f], whole.n[f]);
    EXPECT_EQ(a.hist[f], whole.hist[f]);
    EXPECT_EQ(a.max[f], whole.max[f]);
    for (std::size_t i = 0; i < a.mean[f].size(); ++i) {
      EXPECT_NEAR(a.mean[f][i], whole.mean[f][i], 1e-12 * (1 + std::fabs(whole.mean[f][i])));
      EXPECT_NEAR(a.m2[f][i], whole.m2[f][i], 1e-10 * (1 + std::fabs(whole.m2[f][i])));
    }
  }
}

TEST(Accumulator, MergeIntoEmptyCopiesTheOther) {
  Series s = make_series(10, 3, 1);
  cl::Accumulator empty(cl::GroupBy::all, 3, 0), full(cl::GroupBy::all, 3, 0);
  add_steps(full, s, 0, 10);
  empty.merge(full);
  EXPECT_EQ(empty.mean[kCape], full.mean[kCape]);
  EXPECT_EQ(empty.m2[kCape], full.m2[kCape]);
}

TEST(Accumulator, MeanAndVarianceMatchTheTwoPassFormula) {
  // Two-pass formula (mean first, then the sum of squared deviations): the textbook reference
  // against which Chan, Golub & LeVeque (1979) judge the updating algorithms.
  // A large offset makes the naive sum-of-squares formula lose every digit; the updates must not.
  const double offset = 1.0e8;
  std::vector<double> x;
  for (int i = 0; i < 1000; ++i) x.push_back(offset + std::fmod(i * 0.618033988749895, 1.0) * 10.0);
  double mean = std::accumulate(x.begin(), x.end(), 0.0) / x.size();
  double ss = 0;
  for (double v : x) ss += (v - mean) * (v - mean);
  const double variance = ss / (x.size() - 1);

  cl::Accumulator a(cl::GroupBy::all, 1, 0), b(cl::GroupBy::all, 1, 0);
  for (std::size_t i = 0; i < x.size(); ++i) {
    cl::TimeStepFields step;
    step.field[kCape] = &x[i];
    (i < 377 ? a : b).add(step);
  }
  a.merge(b);
  EXPECT_EQ(a.n[kCape][0], 1000u);
  EXPECT_NEAR(a.mean[kCape][0], mean, 1e-7);
  EXPECT_NEAR(cl::standard_deviation(a.n[kCape][0], a.m2[kCape][0]), std::sqrt(variance), 1e-6);
}

TEST(Accumulator, StandardDeviationOfAKnownSampleIsTheSampleFormula) {
  // 2, 4, 4, 4, 5, 5, 7, 9: mean 5, sum of squared deviations 32, sample variance 32/7
  // (the common textbook example; population standard deviation 2).
  const double xs[] = {2, 4, 4, 4, 5, 5, 7, 9};
  cl::Accumulator acc(cl::GroupBy::all, 1, 0);
  for (double v : xs) {
    cl::TimeStepFields step;
    step.field[0] = &v;
    acc.add(step);
  }
  EXPECT_DOUBLE_EQ(acc.mean[0][0], 5.0);
  EXPECT_NEAR(acc.m2[0][0], 32.0, 1e-12);
  EXPECT_NEAR(cl::standard_deviation(acc.n[0][0], acc.m2[0][0]), std::sqrt(32.0 / 7.0), 1e-12);
  EXPECT_EQ(acc.max[0][0], 9.0);
}

TEST(Accumulator, StandardDeviationOfOneValueIsMissing) {
  EXPECT_TRUE(std::isnan(cl::standard_deviation(1, 0.0)));
}

TEST(Accumulator, FrequenciesCountLatentAndRealLatentClasses) {
  std::int8_t classes[] = {0, 1, 2, -1};
  cl::Accumulator acc(cl::GroupBy::all, 1, 0);
  for (std::int8_t c : classes) {
    cl::TimeStepFields step;
    step.latent_class = &c;
    acc.add(step);
  }
  EXPECT_EQ(acc.count[0], 3u);  // the missing class is not a valid time step
  EXPECT_EQ(acc.latent_count[0], 2u);
  EXPECT_EQ(acc.real_latent_count[0], 1u);
}

TEST(Accumulator, TimeStepsGoToTheGroupOfTheirValidTime) {
  double v = 1.0;
  cl::Accumulator acc(cl::GroupBy::month, 1, 0);
  cl::TimeStepFields step;
  step.field[0] = &v;
  step.valid_time_s = cl::days_from_civil(2001, 7, 31) * 86400 + 23 * 3600;  // July
  acc.add(step);
  EXPECT_EQ(acc.n[0][acc.at(6, 0)], 1u);
  EXPECT_EQ(acc.n[0][acc.at(7, 0)], 0u);
}

TEST(Accumulator, StabilityClassesAreCountedPerLevel) {
  // two levels, one point: level 0 conditionally_unstable (1), level 1 missing
  std::int8_t cls[] = {1, -1};
  cl::Accumulator acc(cl::GroupBy::all, 1, 2);
  cl::TimeStepFields step;
  step.stability_class = cls;
  acc.add(step);
  acc.add(step);
  EXPECT_EQ(acc.stability_count[acc.stability_at(0, 0, 1, 0)], 2u);
  std::uint32_t level1 = 0;
  for (int c = 0; c < cl::kStabilityClassCount; ++c) level1 += acc.stability_count[acc.stability_at(0, 1, c, 0)];
  EXPECT_EQ(level1, 0u);
}

TEST(Accumulator, SerializeRoundTripsEveryArray) {
  Series s = make_series(9, 4, 3);
  cl::Accumulator acc(cl::GroupBy::hour, 4, 0);
  add_steps(acc, s, 0, 9);
  cl::Accumulator back = cl::Accumulator::deserialize(acc.serialize());
  EXPECT_EQ(back.group_by(), cl::GroupBy::hour);
  EXPECT_EQ(back.count, acc.count);
  EXPECT_EQ(back.mean[2], acc.mean[2]);
  EXPECT_EQ(back.hist[4], acc.hist[4]);
}

TEST(Accumulator, MergeRefusesADifferentShape) {
  cl::Accumulator a(cl::GroupBy::all, 3, 0), b(cl::GroupBy::month, 3, 0);
  EXPECT_THROW(a.merge(b), std::runtime_error);
}

// ---- histogram bins and percentiles ---------------------------------------------

TEST(Histogram, BinsAreRightClosedWithAPointMassAtTheFirstEdge) {
  const std::vector<double> edges{0, 10, 20};
  EXPECT_EQ(cl::bin_of(edges, 0.0), 0);
  EXPECT_EQ(cl::bin_of(edges, -3.0), 0);
  EXPECT_EQ(cl::bin_of(edges, 0.5), 1);
  EXPECT_EQ(cl::bin_of(edges, 10.0), 1);
  EXPECT_EQ(cl::bin_of(edges, 10.0001), 2);
  EXPECT_EQ(cl::bin_of(edges, 20.5), 3);  // overflow
}

TEST(Histogram, EdgesOfEveryFieldIncreaseFromZero) {
  for (const auto& spec : cl::field_specs()) {
    EXPECT_EQ(spec.edges.front(), 0.0) << spec.name;
    for (std::size_t k = 1; k < spec.edges.size(); ++k) EXPECT_GT(spec.edges[k], spec.edges[k - 1]) << spec.name;
  }
}

TEST(Histogram, PercentilesOfAUniformSampleAreItsQuantiles) {
  // 10000 values evenly spread over (0, 100]: the q-th percentile of the uniform distribution
  // on [0, 100] is q (definition of the quantile); grouped-data interpolation is exact for
  // a uniform density, up to the 1/10000 discreteness of the sample.
  std::vector<double> edges;
  for (int e = 0; e <= 100; e += 10) edges.push_back(e);
  std::vector<std::uint32_t> counts(edges.size() + 1, 0);
  for (int i = 1; i <= 10000; ++i) ++counts[cl::bin_of(edges, i / 100.0)];
  for (double q : {50.0, 90.0, 99.0}) EXPECT_NEAR(cl::histogram_percentile(counts.data(), edges, 100.0, q), q, 1e-9);
}

TEST(Histogram, PercentilesOfAnExponentialSampleAreWithinOneBin) {
  // Exponential distribution with mean 500: quantile -500 ln(1 - q) (closed form), i.e.
  // p50 = 346.6, p90 = 1151.3, p99 = 2302.6; a sample of 200000 and the mu_cape bins.
  const auto& spec = cl::field_specs()[kCape];
  std::mt19937 rng(42);
  std::exponential_distribution<double> dist(1.0 / 500.0);
  std::vector<std::uint32_t> counts(spec.bin_count(), 0);
  double mx = 0;
  for (int i = 0; i < 200000; ++i) {
    double v = dist(rng);
    mx = std::max(mx, v);
    ++counts[cl::bin_of(spec.edges, v)];
  }
  for (double q : {0.5, 0.9, 0.99}) {
    const double expected = -500.0 * std::log(1.0 - q);
    // bin widths near these values: 50 J/kg (p50) and 100 J/kg (p90, p99); sampling error is smaller
    EXPECT_NEAR(cl::histogram_percentile(counts.data(), spec.edges, mx, 100 * q), expected, 0.2 * 100) << q;
  }
}

TEST(Histogram, PercentileInThePointMassIsTheFirstEdge) {
  const std::vector<double> edges{0, 10, 20};
  std::vector<std::uint32_t> counts{6, 2, 2, 0};  // 60 % zeros
  EXPECT_EQ(cl::histogram_percentile(counts.data(), edges, 20.0, 50.0), 0.0);
  // 90th: rank 9 of 10 falls in (10, 20] at half of its two values -> 15
  EXPECT_DOUBLE_EQ(cl::histogram_percentile(counts.data(), edges, 20.0, 90.0), 15.0);
}

TEST(Histogram, PercentileInTheOverflowBinSpansUpToTheMaximum) {
  const std::vector<double> edges{0, 10};
  std::vector<std::uint32_t> counts{0, 0, 4};  // four values above 10, the largest 50
  EXPECT_DOUBLE_EQ(cl::histogram_percentile(counts.data(), edges, 50.0, 50.0), 30.0);
}

TEST(Histogram, PercentileIsCappedAtTheMaximum) {
  const std::vector<double> edges{0, 100};
  std::vector<std::uint32_t> counts{0, 1, 0};  // one value, 3
  EXPECT_DOUBLE_EQ(cl::histogram_percentile(counts.data(), edges, 3.0, 99.0), 3.0);
}

TEST(Histogram, PercentileOfAnEmptyHistogramIsMissing) {
  const std::vector<double> edges{0, 100};
  std::vector<std::uint32_t> counts{0, 0, 0};
  EXPECT_TRUE(std::isnan(cl::histogram_percentile(counts.data(), edges, 0.0, 50.0)));
}

TEST(Histogram, PercentilesOfAllPointsEqualTheOnePointRule) {
  const int points = 23;
  Series s = make_series(60, points, 11);
  cl::Accumulator acc(cl::GroupBy::season, points, 0);
  add_steps(acc, s, 0, 60);
  const auto& spec = cl::field_specs()[kCape];
  for (double q : {50.0, 90.0, 99.0}) {
    const std::vector<double> all = acc.percentile(kCape, q);
    for (int g = 0; g < acc.groups(); ++g)
      for (int p = 0; p < points; ++p) {
        std::vector<std::uint32_t> one(spec.bin_count());
        for (int b = 0; b < spec.bin_count(); ++b) one[b] = acc.hist[kCape][acc.hist_at(kCape, g, b, p)];
        const double expected = cl::histogram_percentile(one.data(), spec.edges, acc.max[kCape][acc.at(g, p)], q);
        const double got = all[acc.at(g, p)];
        if (std::isnan(expected)) EXPECT_TRUE(std::isnan(got));
        else EXPECT_EQ(got, expected) << "group " << g << " point " << p << " q " << q;
      }
  }
}

TEST(Histogram, TableLookUpEqualsTheBinarySearchEverywhere) {
  for (int f = 0; f < cl::kFieldCount; ++f) {
    const auto& edges = cl::field_specs()[f].edges;
    std::vector<double> values{-1.0, 0.0, 1e-300, 1e9};
    for (double e : edges)
      for (double v : {e, std::nextafter(e, -1e300), std::nextafter(e, 1e300), e + 0.5, e + 1e-9})
        values.push_back(v);
    for (int i = 0; i < 100000; ++i) values.push_back(i * 0.0937 * (f + 1));
    for (double v : values) ASSERT_EQ(cl::field_bin(f, v), cl::bin_of(edges, v)) << cl::field_specs()[f].name << " " << v;
  }
}
