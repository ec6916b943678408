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
    // Chunked (NetCDF-4) input: let the chunk cache hold every chunk one block touches, so
    // that each chunk is decompressed once, not once per block.
    int storage;
    size_t chunk[4];
    check(nc_inq_var_chunking(file.id, var, &storage, chunk), "chunking");
    if (storage == NC_CHUNKED) {
      size_t touched = 1;
      for (int d = 1; d < 4; ++d) {
        size_t extent = d == 2 ? std::min(rows_per_block, len[2]) : len[d];
        touched *= (extent + chunk[d] - 1) / chunk[d] + (d == 2 ? 1 : 0);
      }
      size_t chunk_bytes = 4 * chunk[0] * chunk[1] * chunk[2] * chunk[3];
      check(nc_set_var_chunk_cache(file.id, var, touched * chunk_bytes, 2 * touched + 1, 0.75f), "chunk cache");
    }
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
