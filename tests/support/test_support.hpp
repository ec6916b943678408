// Helpers shared by the test suites: paths and running the latentlift binary.
#pragma once

#include <string>

namespace latentlift::test {

/// Check values shared by the I/O suites.
constexpr double kZeroCelsiusK = 273.15;  // K (SI definition of the Celsius scale)
constexpr double kGravity = 9.80665;      // m s-2 (standard gravity, CGPM 1901)

/// Folder of the test sources (tests/).
std::string test_dir();
/// The shared real-data folder (../shared/real-data beside the checkout).
std::string real_data_dir();
/// Path of the built latentlift executable.
std::string binary();
/// A fresh empty scratch folder for one test.
std::string scratch_dir(const std::string& name);
/// The Python 3 interpreter with NumPy/SciPy/netCDF4 (Debian's /usr/bin/python3).
std::string python();

struct CommandResult {
  int exit_code;
  std::string output;  // stdout and stderr together
};
/// Run a shell command and capture its output and exit code.
CommandResult run_command(const std::string& command);

}  // namespace latentlift::test
