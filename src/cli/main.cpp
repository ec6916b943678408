// The latentlift executable: a thin shell over cli::run (src/cli).
#include <unistd.h>

#include <cstdio>

#include "io/netcdf_util.hpp"
#include "latentlift/cli.hpp"

int main(int argc, char** argv) {
  const int exit_code = latentlift::cli::run(argc, argv);
  // A netCDF file whose final flush failed (disk full) stays open inside HDF5, and HDF5's exit
  // handler crashes on it: the outputs are removed by then, so end without exit handlers.
  if (latentlift::io::detail::netcdf_files_left_open()) {
    std::fflush(nullptr);
    ::_exit(exit_code);
  }
  return exit_code;
}
