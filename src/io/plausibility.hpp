// Internal to src/io (and the readers built on it: NetCDF, GRIB, the Python module): the one
// place where input is judged physically plausible, after unit conversion and unpacking and
// before the kernel. A quantity implausible as a whole throws InputError naming the file, the
// variable, its units attribute and what was found; single bad values are left to the
// kernel's quality control. Thresholds and their sources: README "Plausibility of the input".
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include "latentlift/column.hpp"

namespace latentlift::io::detail {

/// Text cut to at most max_chars characters ("..." appended), for echoing attribute values.
std::string shorten(const std::string& text, std::size_t max_chars = 60);

/// "1.5 GiB": a byte count for messages.
std::string format_bytes(double bytes);

/// InputError when allocating `bytes` for `what` of `file` exceeds the machine's physical
/// memory (a damaged or absurd dimension): says how much would be needed.
void check_memory(const std::string& file, const std::string& variable, const std::string& what, double bytes);

/// One attribute as found in the file: text, or numbers (any numeric type, as double).
struct AttributeValue {
  bool present = false;
  bool is_text = false;
  std::string text;
  std::vector<double> numbers;
};

/// Packing and fill attributes: scale_factor and add_offset numeric, scalar, finite, scale
/// non-zero; _FillValue numeric and scalar; missing_value numeric; valid_range two numbers,
/// valid_min/valid_max scalar numbers. InputError otherwise.
void check_packing_attribute(const std::string& file, const std::string& variable, const std::string& name,
                             const AttributeValue& value);

/// The pressure coordinate (Pa, in the file's order): at least 3 levels, finite, within
/// 1-1100 hPa, strictly monotonic (no duplicates).
void check_pressure_levels(const std::string& file, const std::string& variable, const std::string& units,
                           const std::vector<double>& pressure_pa);

/// Latitudes within -90..90 and longitudes within -360..720 degrees; non-finite values
/// only where allowed (auxiliary 2-D coordinates outside a projection's domain).
void check_latitudes(const std::string& file, const std::string& variable, const std::string& units,
                     const std::vector<double>& degrees, bool allow_missing);
void check_longitudes(const std::string& file, const std::string& variable, const std::string& units,
                      const std::vector<double>& degrees, bool allow_missing);

/// A surface pressure a column can be analysed with (Pa): finite, within 300-1100 hPa.
/// Columns with any other value are skipped and counted (QcCounts::surface_pressure_rejected).
bool plausible_surface_pressure(double pressure_pa);

/// Where a sampled quantity came from, and how its SI values relate to the file's units:
/// SI = value_in_units * si_per_unit + si_offset (unit conversion only, packing excluded).
struct FieldOrigin {
  std::string file, variable, units;
  std::string quantity;  // CF standard_name of what the variable holds (geopotential or geopotential_height ...)
  double si_per_unit = 1.0, si_offset = 0.0;
  bool present() const { return !variable.empty(); }
};

/// A sample of columns in SI units, [column][level] with levels in the pressure coordinate's
/// order; NaN = missing. surface_pressure_pa is empty or one value per column.
struct ColumnSample {
  std::vector<double> pressure_pa;
  std::size_t n_columns = 0;
  std::vector<double> temp_k, humidity, height_m, surface_pressure_pa;
  HumidityKind humidity_kind = HumidityKind::specific_humidity;
  FieldOrigin temp, humidity_origin, height, surface_pressure;
};

/// Whole-quantity plausibility of a sample (medians, the heights' order and their agreement
/// with the temperatures by the hypsometric equation). InputError on the first failure.
void check_sample(const ColumnSample& sample);

}  // namespace latentlift::io::detail
