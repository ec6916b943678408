// Plausibility at the edge (src/io/plausibility.cpp): damaged or mislabelled inputs are refused
// as a whole with one message naming file, variable, units and what was found; single bad
// columns are quality-controlled and counted. The small grids come from tests/io/nc_builder.hpp.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <functional>
#include <limits>

#include "io/nc_builder.hpp"
#include "io/plausibility.hpp"
#include "latentlift/config.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "latentlift/pipeline.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Att;
using test::Index;
using test::SmallGrid;
using test::Var;

using test::kGravity;
using test::kZeroCelsiusK;


class Plausibility : public ::testing::Test {
 protected:
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path(const std::string& name) const { return dir + "/" + name; }
  SmallGrid grid;

  /// The standard small grid with hypsometrically consistent heights; index 4 temp, 5 hum, 6 height.
  std::vector<Var> vars() const {
    std::vector<Var> v = grid.standard();
    v[6] = grid.var("height", "geopotential_height", "m", SmallGrid::hypsometric_z_m);
    return v;
  }

  /// The message of the InputError thrown while opening `file` (fails the test when none is thrown).
  std::string open_error(const std::vector<std::string>& files, const InputAliases& aliases = {},
                         const InputConventions& conventions = {}) {
    try {
      InputDataset input(files, aliases, conventions);
    } catch (const InputError& e) {
      return e.what();
    }
    ADD_FAILURE() << "expected an InputError";
    return "";
  }
  std::string open_error(const std::vector<Var>& variables, const test::Dims& dims = {}) {
    test::write_nc(path("in.nc"), dims.empty() ? grid.dims : dims, variables);
    return open_error(std::vector<std::string>{path("in.nc")});
  }
};

TEST_F(Plausibility, AcceptsTheConsistentSmallGrid) {
  test::write_nc(path("in.nc"), grid.dims, vars());
  EXPECT_NO_THROW(InputDataset({path("in.nc")}, {}));
}

// ---- temperature

TEST_F(Plausibility, KelvinLabelledCelsiusIsRefusedWithItsMedianInTheFileUnits) {
  std::vector<Var> v = vars();
  v[4] = grid.var("temp", "air_temperature", "degC", SmallGrid::temp_k);  // values in K, units say degC
  const std::string message = open_error(v);
  EXPECT_NE(message.find("in.nc: variable 'temp': air temperature in 'degC' has a median of 2"), std::string::npos) << message;
  EXPECT_NE(message.find("the values look like kelvin"), std::string::npos) << message;
}

TEST_F(Plausibility, CelsiusLabelledKelvinIsRefused) {
  std::vector<Var> v = vars();
  v[4] = grid.var("temp", "air_temperature", "K", [](const Index& i) { return SmallGrid::temp_k(i) - kZeroCelsiusK; });
  EXPECT_NE(open_error(v).find("the values look like degrees Celsius"), std::string::npos);
}

TEST_F(Plausibility, ANegativeScaleFactorGivesAnImplausibleTemperature) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"scale_factor", "", {-1.0}, NC_FLOAT});  // the stored kelvin values unpack to -T
  const std::string message = open_error(v);
  EXPECT_NE(message.find("air temperature in 'K' has a median of -2"), std::string::npos) << message;
}

TEST_F(Plausibility, OneImplausibleLevelIsLeftToQualityControl) {
  std::vector<Var> v = vars();
  v[4] = grid.var("temp", "air_temperature", "K", [](const Index& i) {
    return i.at("level") == 3 && i.at("lon") == 0 ? 1000.0 : SmallGrid::temp_k(i);
  });
  test::write_nc(path("in.nc"), grid.dims, v);
  EXPECT_NO_THROW(InputDataset({path("in.nc")}, {}));
}

// ---- humidity

TEST_F(Plausibility, SpecificHumidityInGramsPerKilogramLabelledKilogramsIsRefused) {
  std::vector<Var> v = vars();
  v[5] = grid.var("hum", "specific_humidity", "kg kg-1", [](const Index& i) { return 1000.0 * SmallGrid::q(i); });
  const std::string message = open_error(v);
  EXPECT_NE(message.find("variable 'hum': specific humidity in 'kg kg-1' is a median"), std::string::npos)
      << message;
  EXPECT_NE(message.find("the values look like g/kg"), std::string::npos) << message;
}

TEST_F(Plausibility, SpecificHumidityLabelledPercentIsRefusedAsTooDry) {
  std::vector<Var> v = vars();
  v[5] = grid.var("hum", "specific_humidity", "%", SmallGrid::q);  // kg/kg values read as percent: 100 times too small
  const std::string message = open_error(v);
  EXPECT_NE(message.find("specific humidity in '%'"), std::string::npos) << message;
  EXPECT_NE(message.find("100 times too small"), std::string::npos) << message;
}

TEST_F(Plausibility, RelativeHumidityInPercentLabelledOneIsRefused) {
  std::vector<Var> v = vars();
  v[5] = grid.var("hum", "relative_humidity", "1", [](const Index& i) { return 40.0 + 10.0 * i.at("level"); });
  const std::string message = open_error(v);
  EXPECT_NE(message.find("relative humidity in '1' has a median of"), std::string::npos) << message;
  EXPECT_NE(message.find("the values look like percent"), std::string::npos) << message;
}

TEST_F(Plausibility, RelativeHumidityAsFractionLabelledPercentIsRefused) {
  std::vector<Var> v = vars();
  v[5] = grid.var("hum", "relative_humidity", "%", [](const Index& i) { return 0.4 + 0.1 * i.at("level"); });
  EXPECT_NE(open_error(v).find("the values look like a fraction (0 to 1)"), std::string::npos);
}

// ---- heights

TEST_F(Plausibility, NegatedGeopotentialHeightIsRefused) {
  std::vector<Var> v = vars();
  v[6] = grid.var("height", "geopotential_height", "m", [](const Index& i) { return -SmallGrid::hypsometric_z_m(i); });
  const std::string message = open_error(v);
  EXPECT_NE(message.find("geopotential height in 'm' decreases upward in 12 of 12 sampled columns"), std::string::npos)
      << message;
}

TEST_F(Plausibility, GeopotentialLabelledMetresIsRefusedByTheHypsometricEquation) {
  std::vector<Var> v = vars();
  v[6] = grid.var("height", "geopotential_height", "m", [](const Index& i) { return kGravity * SmallGrid::hypsometric_z_m(i); });
  const std::string message = open_error(v);
  EXPECT_NE(message.find("the values look like geopotential (m2 s-2), not geopotential height (m)"), std::string::npos)
      << message;
}

TEST_F(Plausibility, APressureCoordinateOutOfOrderIsRefused) {
  std::vector<Var> v = vars();
  v[1].data = {1000, 700, 850, 500};
  EXPECT_NE(open_error(v).find("level 2 (850 hPa) after 700 hPa breaks the descending order"), std::string::npos);
}

TEST_F(Plausibility, AReversedPressureCoordinateAgainstItsDataIsRefusedByTheHeights) {
  std::vector<Var> v = vars();
  v[1].data = {500, 700, 850, 1000};  // monotonic, but the data run from 1000 hPa up
  const std::string message = open_error(v);
  EXPECT_NE(message.find("decreases upward"), std::string::npos) << message;
  EXPECT_NE(message.find("pressure levels in the reverse order of the data"), std::string::npos) << message;
}

TEST_F(Plausibility, HeightsOutOfOrderInMostColumnsAreRefused) {
  std::vector<Var> v = vars();
  v[6] = grid.var("height", "geopotential_height", "m", [](const Index& i) {
    static const std::size_t swapped[] = {0, 2, 1, 3};  // data of 700 and 850 hPa exchanged
    Index j = i;
    j["level"] = swapped[i.at("level")];
    return SmallGrid::hypsometric_z_m(j);
  });
  const std::string message = open_error(v);
  EXPECT_NE(message.find("is not monotonic in pressure in 12 of 12 sampled columns"), std::string::npos) << message;
}

// ---- the pressure coordinate

TEST_F(Plausibility, DuplicatePressureLevelsAreRefused) {
  std::vector<Var> v = vars();
  v[1].data = {1000, 850, 850, 500};
  EXPECT_NE(open_error(v).find("850 hPa appears twice (levels 1 and 2)"), std::string::npos);
}

TEST_F(Plausibility, PressureInHectopascalsLabelledKilopascalsIsRefused) {
  std::vector<Var> v = vars();
  v[1].atts = {{"units", "kPa"}};
  const std::string message = open_error(v);
  EXPECT_NE(message.find("variable 'level': pressure levels in 'kPa' range from 5000 to 1e+04 hPa: expected 1 to 1100 hPa"),
            std::string::npos)
      << message;
}

TEST_F(Plausibility, FewerThanThreeLevelsAreRefused) {
  test::Dims dims = {{"time", 2}, {"level", 2}, {"lat", 3}, {"lon", 4}};
  SmallGrid two;
  two.dims = dims;
  two.levels_hpa = {1000, 850};
  std::vector<Var> v = two.standard();
  EXPECT_NE(open_error(v, dims).find("at least 3 pressure levels"), std::string::npos);
}

// ---- packing and fill attributes

TEST_F(Plausibility, TextScaleFactorIsRefused) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"scale_factor", "abc"});
  EXPECT_NE(open_error(v).find("attribute scale_factor: expected one finite, non-zero number, found text 'abc'"),
            std::string::npos);
}

TEST_F(Plausibility, TwoElementScaleFactorIsRefused) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"scale_factor", "", {1.0, 2.0}, NC_FLOAT});
  EXPECT_NE(open_error(v).find("found 2 values"), std::string::npos);
}

TEST_F(Plausibility, ZeroScaleFactorIsRefused) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"scale_factor", "", {0.0}, NC_FLOAT});
  EXPECT_NE(open_error(v).find("attribute scale_factor: expected one finite, non-zero number, found 0"), std::string::npos);
}

TEST_F(Plausibility, InfiniteAddOffsetIsRefused) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"add_offset", "", {std::numeric_limits<double>::infinity()}, NC_DOUBLE});
  EXPECT_NE(open_error(v).find("attribute add_offset: expected one finite number, found inf"), std::string::npos);
}

TEST_F(Plausibility, TextMissingValueIsRefused) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"missing_value", "abc"});
  EXPECT_NE(open_error(v).find("attribute missing_value: expected numbers, found text 'abc'"), std::string::npos);
}

TEST_F(Plausibility, LongAttributeValuesAreCutShortInMessages) {
  std::vector<Var> v = vars();
  v[4].atts.push_back({"scale_factor", std::string(5000, 'x')});
  const std::string message = open_error(v);
  EXPECT_LT(message.size(), 300u) << message;
  EXPECT_NE(message.find("(5000 characters)"), std::string::npos) << message;
}

// ---- latitudes, longitudes, dimensions

TEST_F(Plausibility, LatitudesBeyondTheGeographicRangeAreRefused) {
  std::vector<Var> v = vars();
  v[2].data = {110, 200, 290};
  EXPECT_NE(open_error(v).find("variable 'lat': latitude in 'degrees_north' ranges from 110 to 290: expected -90 to 90"),
            std::string::npos);
}

TEST_F(Plausibility, AZeroLengthHorizontalDimensionIsRefused) {
  test::Dims dims = {{"time", 2}, {"level", 4}, {"lat", 0}, {"lon", 4}};
  std::vector<Var> v = vars();
  v[2].data.clear();
  for (std::size_t k = 4; k < 7; ++k) v[k].data.clear();
  EXPECT_NE(open_error(v, dims).find("dimension 'lat' has length 0"), std::string::npos);
}

TEST_F(Plausibility, ZeroTimeStepsAreRefused) {
  test::Dims dims = {{"time", 0}, {"level", 4}, {"lat", 3}, {"lon", 4}};
  std::vector<Var> v = vars();
  v[0].data.clear();
  for (std::size_t k = 4; k < 7; ++k) v[k].data.clear();
  EXPECT_NE(open_error(v, dims).find("dimension 'time' has length 0: expected at least one time step"), std::string::npos);
}

TEST_F(Plausibility, AHugeDimensionIsRefusedWithTheMemoryItWouldNeed) {
  EXPECT_THROW(io::detail::check_memory("f.nc", "lat", "reading it", 1e20), InputError);
  try {
    io::detail::check_memory("f.nc", "lat", "reading it", 1e20);
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("reading it would need 86.7 EiB of memory"), std::string::npos) << e.what();
  }
}

// ---- two candidates

TEST_F(Plausibility, TwoVariablesWithOneStandardNameAreRefusedListingBoth) {
  std::vector<Var> v = vars();
  Var copy = v[4];
  copy.name = "temp2";
  v.push_back(copy);
  const std::string message = open_error(v);
  EXPECT_NE(message.find("one variable with standard_name 'air_temperature', found 2: 'temp', 'temp2'"), std::string::npos)
      << message;
}

TEST_F(Plausibility, TheConfigNamesOneOfTwoCandidates) {
  std::vector<Var> v = vars();
  Var copy = v[4];
  copy.name = "temp2";
  v.push_back(copy);
  test::write_nc(path("in.nc"), grid.dims, v);
  InputConventions conventions;
  conventions.chosen_quantities = {"air_temperature"};  // as set by --set input.air_temperature=temp2
  InputDataset input({path("in.nc")}, {{"air_temperature", {"temp2"}}}, conventions);
  EXPECT_EQ(input.sources()[0].variable, "temp2");
}

// ---- surface pressure

TEST_F(Plausibility, SurfacePressureInPascalsLabelledHectopascalsIsRefused) {
  std::vector<Var> v = vars();
  v.push_back(grid.var("ps", "surface_air_pressure", "hPa", [](const Index&) { return 101000.0; }, {"time", "lat", "lon"}));
  const std::string message = open_error(v);
  EXPECT_NE(message.find("surface air pressure in 'hPa' has a median of 1.01e+05"), std::string::npos) << message;
  EXPECT_NE(message.find("100 times too large"), std::string::npos) << message;
}

TEST_F(Plausibility, AZeroSurfacePressureSkipsAndCountsItsColumnInsteadOfIgnoringIt) {
  std::vector<Var> v = vars();
  v.push_back(grid.var("ps", "surface_air_pressure", "Pa",
                       [](const Index& i) { return i.at("lon") == 0 && i.at("lat") == 0 ? 0.0 : 101000.0; },
                       {"time", "lat", "lon"}));
  test::write_nc(path("in.nc"), grid.dims, v);
  InputDataset input({path("in.nc")}, {});
  PipelineOptions options;
  options.config = load_config("", {});
  options.time_indices = {0};
  RunSummary summary = analyze_in_memory(input, options, [](std::size_t, const FieldSet&) {});
  EXPECT_EQ(summary.qc.surface_pressure_rejected, 1);
  EXPECT_EQ(summary.qc.columns_skipped, 1);
  EXPECT_EQ(summary.qc.columns_analysed, 11);
}

// ---- nothing analysed

TEST_F(Plausibility, ARunThatAnalysesNoColumnIsAnInputErrorWithTheReasons) {
  std::vector<Var> v = vars();
  const double fill = 9.96921e36;  // netCDF default float fill (netcdf.h NC_FILL_FLOAT)
  v[4] = grid.var("temp", "air_temperature", "K",
                  [&](const Index& i) { return i.at("level") < 2 ? SmallGrid::temp_k(i) : fill; });
  test::write_nc(path("in.nc"), grid.dims, v);
  InputDataset input({path("in.nc")}, {});
  PipelineOptions options;
  options.config = load_config("", {});
  try {
    analyze_in_memory(input, options, [](std::size_t, const FieldSet&) {});
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("none of 24 columns was (24 with fewer than 3 usable levels"), std::string::npos)
        << e.what();
  }
}

// ---- files that are not NetCDF or are damaged

TEST_F(Plausibility, AFileThatIsNotNetcdfIsNamedWithItsFirstBytes) {
  std::ofstream(path("in.nc")) << "XYZW....";
  const std::string message = open_error(std::vector<std::string>{path("in.nc")});
  EXPECT_NE(message.find("in.nc: expected a NetCDF file (classic 'CDF' or NetCDF-4/HDF5) or a GRIB file, found one starting with 'XYZW'"),
            std::string::npos)
      << message;
}

TEST_F(Plausibility, ATruncatedNetcdf4FileIsCalledDamaged) {
  test::write_nc(path("full.nc"), grid.dims, vars());
  std::ifstream in(path("full.nc"), std::ios::binary);
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  std::ofstream(path("in.nc"), std::ios::binary) << bytes.substr(0, 600);
  const std::string message = open_error(std::vector<std::string>{path("in.nc")});
  EXPECT_NE(message.find("this NetCDF-4/HDF5 file of 600 bytes is damaged or truncated"), std::string::npos) << message;
}

}  // namespace
}  // namespace latentlift
