// Instructions per column of the column kernel, for callgrind (scripts/bench_kernel.sh
// --instructions): analyses every column of the benchmark pool (bench/column_pool.hpp,
// 37 levels) twice with one ColumnAnalyzer, so that callgrind, collecting only inside
// ColumnAnalyzer::analyze, counts 2 x 4096 columns. Instruction counts do not depend on
// the load of the machine, unlike the rates of bench_column.
// Usage: count_column virtual|temperature max_cape|max_theta_w [level_fields]
#include <cstdio>
#include <cstring>
#include <stdexcept>

#include "column_pool.hpp"
#include "latentlift/column.hpp"
#include "latentlift/pseudoadiabat.hpp"
#include "latentlift/settings.hpp"

int main(int argc, char** argv) {
  if (argc < 3) {
    std::fprintf(stderr, "usage: count_column virtual|temperature max_cape|max_theta_w [level_fields]\n");
    return 2;
  }
  latentlift::AnalysisSettings s;
  try {
    s.buoyancy = latentlift::parse_buoyancy_mode(argv[1]);
    s.mu_parcel = latentlift::parse_mu_parcel_rule(argv[2]);
  } catch (const std::invalid_argument& e) {
    std::fprintf(stderr, "count_column: %s\n", e.what());
    return 2;
  }
  s.level_fields = argc > 3 && std::strcmp(argv[3], "level_fields") == 0;
  const auto& columns = latentlift::bench::column_pool(37);
  latentlift::pseudoadiabat::Table::instance();
  latentlift::ColumnAnalyzer analyzer(s);
  latentlift::ColumnResult result;
  double sink = 0.0;
  for (int pass = 0; pass < 2; ++pass)
    for (const auto& c : columns) {
      analyzer.analyze(c.view(), result);
      sink += result.latent_class;
    }
  std::printf("%zu columns analysed (checksum %.0f)\n", 2 * columns.size(), sink);
  return 0;
}
