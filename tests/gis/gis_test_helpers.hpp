// Helpers of the gis tests: test grids written by make_cf_grid.py, reading them back.
#pragma once

#include <sstream>
#include <string>
#include <vector>

#include "support/test_support.hpp"

namespace latentlift::test {

/// Writes a grid laid out like an analyze output (tests/gis/make_cf_grid.py) and returns its path.
inline std::string make_cf_grid(const std::string& dir, const std::string& mapping, const std::string& extra = "") {
  std::string path = dir + "/" + mapping + ".nc";
  auto result = run_command(python() + " " + test_dir() + "/gis/make_cf_grid.py --mapping " + mapping +
                            " --out " + path + " " + extra);
  if (result.exit_code != 0) throw std::runtime_error("make_cf_grid.py failed: " + result.output);
  return path;
}

/// Whitespace-separated numbers of a text.
inline std::vector<double> numbers_of(const std::string& text) {
  std::istringstream in(text);
  std::vector<double> out;
  std::string token;
  while (in >> token) {
    try {
      std::size_t used = 0;
      double value = std::stod(token, &used);
      if (used == token.size()) out.push_back(value);
    } catch (...) {
    }
  }
  return out;
}

inline std::string shell_quote(const std::string& text) {
  std::string out = "'";
  for (char c : text) out += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return out + "'";
}

}  // namespace latentlift::test
