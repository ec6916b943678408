// Benchmark baseline: only read the variables of a NetCDF grid with netCDF-C, a block of
// rows (all levels) at a time, as an analysis would; no analysis, no output. Built and run
// by scripts/bench_grid.sh (compiled directly; no library of latentlift needed).
// Usage: read_grid FILE.nc ROWS_PER_BLOCK VAR...
#include <netcdf.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

namespace {

void check(int status, const char* what) {
  if (status != NC_NOERR) {
    std::fprintf(stderr, "read_grid: %s: %s\n", what, nc_strerror(status));
    std::exit(1);
  }
}

// Owns an open NetCDF id.
struct NcHandle {
  int id = -1;
  explicit NcHandle(const char* path) { check(nc_open(path, NC_NOWRITE, &id), path); }
  ~NcHandle() { nc_close(id); }
  NcHandle(const NcHandle&) = delete;
  NcHandle& operator=(const NcHandle&) = delete;
};

}  // namespace

int main(int argc, char** argv) {
  if (argc < 4) {
    std::fprintf(stderr, "usage: read_grid FILE.nc ROWS_PER_BLOCK VAR...\n");
    return 2;
  }
  const auto start = std::chrono::steady_clock::now();
  NcHandle file(argv[1]);
  const size_t rows_per_block = std::strtoul(argv[2], nullptr, 10);
  double checksum = 0.0;
  size_t values = 0;
  for (int a = 3; a < argc; ++a) {
    int var, ndims;
    check(nc_inq_varid(file.id, argv[a], &var), argv[a]);
    check(nc_inq_varndims(file.id, var, &ndims), "ndims");
    if (ndims != 4) {
      std::fprintf(stderr, "read_grid: %s: expected (time, level, row, column)\n", argv[a]);
      return 2;
    }
    int dims[4];
    size_t len[4];
    check(nc_inq_vardimid(file.id, var, dims), "dimids");
    for (int d = 0; d < 4; ++d) check(nc_inq_dimlen(file.id, dims[d], &len[d]), "dimlen");
    std::vector<float> block(len[1] * rows_per_block * len[3]);
    for (size_t t = 0; t < len[0]; ++t) {
      for (size_t r0 = 0; r0 < len[2]; r0 += rows_per_block) {
        size_t rows = std::min(rows_per_block, len[2] - r0);
        size_t start_idx[4] = {t, 0, r0, 0}, count[4] = {1, len[1], rows, len[3]};
        check(nc_get_vara_float(file.id, var, start_idx, count, block.data()), "read");
        size_t n = len[1] * rows * len[3];
        for (size_t i = 0; i < n; i += 97) checksum += block[i];
        values += n;
      }
    }
  }
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  std::printf("read_grid: %zu values (%.0f MB) in %.3f s (%.0f MB/s), checksum %.6g\n", values,
              values * 4.0 / 1e6, seconds, values * 4.0 / 1e6 / seconds, checksum);
  return 0;
}
