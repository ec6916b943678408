// The benchmark's columns: 4096 varied, physically plausible columns on the 37 ERA5
// levels (1000-1 hPa) or the 27 up to 100 hPa (tests/column/random_columns.hpp), seeded,
// shared by bench_column (Google Benchmark) and count_column (callgrind).
#pragma once

#include <random>
#include <vector>

#include "column/random_columns.hpp"

namespace latentlift::bench {

inline const std::vector<test::OwnedColumn>& column_pool(int levels_case) {
  static const std::vector<test::OwnedColumn> full = [] {
    std::mt19937 rng(424242u);
    std::vector<test::OwnedColumn> out;
    for (int i = 0; i < 4096; ++i) out.push_back(test::random_column(rng, test::era5_levels_hpa()));
    return out;
  }();
  static const std::vector<test::OwnedColumn> to100 = [] {
    std::mt19937 rng(434343u);
    std::vector<test::OwnedColumn> out;
    for (int i = 0; i < 4096; ++i) out.push_back(test::random_column(rng, test::era5_levels_to_100_hpa()));
    return out;
  }();
  return levels_case == 37 ? full : to100;
}

}  // namespace latentlift::bench
