// GRIB input: hand-built GRIB2 messages (ecCodes API) for each grid type, scanning modes and a
// bitmap decode to the coordinates ecCodes' own geo-iterator gives each point (the reference)
// and to the values written there; messages in any order, several files, times and members.
#include <eccodes.h>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <functional>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

struct HandleDeleter {
  void operator()(codes_handle* h) const { codes_handle_delete(h); }
};
using Handle = std::unique_ptr<codes_handle, HandleDeleter>;

void ok(int err, const std::string& what) {
  if (err != CODES_SUCCESS) throw std::runtime_error(what + ": " + codes_get_error_message(err));
}

/// A grid set-up: keys of the grid definition (set in order) on a GRIB2 sample message.
struct GridKeys {
  std::vector<std::pair<std::string, long>> longs;
  std::vector<std::pair<std::string, double>> doubles;
  std::string grid_type;  // for messages
};

/// One message: grid keys, parameter, level (hPa), validity, member, values (in stored order).
Handle make_message(const GridKeys& grid, long param_id, long level_hpa, long date, long time_hhmm, long member,
                    const std::vector<double>& values, bool bitmap = false) {
  Handle h(codes_grib_handle_new_from_samples(nullptr, "GRIB2"));
  if (!h) throw std::runtime_error("no GRIB2 sample");
  codes_handle* p = h.get();
  for (const auto& [key, value] : grid.longs) ok(codes_set_long(p, key.c_str(), value), key);
  for (const auto& [key, value] : grid.doubles) ok(codes_set_double(p, key.c_str(), value), key);
  ok(codes_set_long(p, "dataDate", date), "dataDate");
  ok(codes_set_long(p, "dataTime", time_hhmm), "dataTime");
  if (member > 0) {
    ok(codes_set_long(p, "productDefinitionTemplateNumber", 1), "pdt");
    ok(codes_set_long(p, "perturbationNumber", member), "perturbationNumber");
    ok(codes_set_long(p, "numberOfForecastsInEnsemble", 10), "numberOfForecastsInEnsemble");
  }
  ok(codes_set_long(p, "paramId", param_id), "paramId");
  if (level_hpa > 0) {
    ok(codes_set_string(p, "typeOfLevel", "isobaricInhPa", nullptr), "typeOfLevel");
    ok(codes_set_long(p, "level", level_hpa), "level");
  } else {
    ok(codes_set_string(p, "typeOfLevel", "surface", nullptr), "typeOfLevel");
  }
  ok(codes_set_long(p, "bitsPerValue", 24), "bitsPerValue");
  if (bitmap) {
    ok(codes_set_double(p, "missingValue", 9999.0), "missingValue");
    ok(codes_set_long(p, "bitmapPresent", 1), "bitmapPresent");
  }
  ok(codes_set_double_array(p, "values", values.data(), values.size()), "values");
  return h;
}

void append(const std::string& path, const Handle& h, bool first) {
  const void* buffer = nullptr;
  size_t size = 0;
  ok(codes_get_message(h.get(), &buffer, &size), "get message");
  std::FILE* f = std::fopen(path.c_str(), first ? "wb" : "ab");
  std::fwrite(buffer, 1, size, f);
  std::fclose(f);
}

/// ecCodes' latitude/longitude of every stored point (the reference for our coordinates).
void reference_points(const Handle& h, std::vector<double>& lat, std::vector<double>& lon) {
  size_t n = 0;
  codes_get_size(h.get(), "values", &n);
  std::vector<double> values(n);
  lat.resize(n);
  lon.resize(n);
  ok(codes_grib_get_data(h.get(), lat.data(), lon.data(), values.data()), "get data");
}

const std::vector<long> kLevels = {1000, 850, 700, 500};

/// Temperature of stored point k at level index l (an invented smooth field).
double temp_of(std::size_t k, std::size_t l) { return 290.0 - 12.0 * l + 0.1 * static_cast<double>(k % 17); }

class GribInput : public ::testing::Test {
 protected:
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path(const std::string& name) const { return dir + "/" + name; }

  /// t, r, gh on kLevels in reverse level order (any order must do), one validity time.
  std::string write_grid(const GridKeys& grid, std::size_t n_points, bool bitmap = false) {
    const std::string file = path("in.grib2");
    bool first = true;
    for (std::size_t l = kLevels.size(); l-- > 0;) {
      std::vector<double> t(n_points), r(n_points, 70.0), z(n_points);
      for (std::size_t k = 0; k < n_points; ++k) {
        t[k] = temp_of(k, l);
        z[k] = 100.0 + 1500.0 * static_cast<double>(l);
      }
      if (bitmap) t[1] = 9999.0;  // missing at stored point 1
      append(file, make_message(grid, 130, kLevels[l], 20240101, 1200, 0, t, bitmap && l == 0), first);
      append(file, make_message(grid, 157, kLevels[l], 20240101, 1200, 0, r), false);
      append(file, make_message(grid, 156, kLevels[l], 20240101, 1200, 0, z), false);
      first = false;
    }
    return file;
  }

  /// Every stored point: our column of ecCodes' lat/lon holds the value written there.
  void expect_points_match(const GridKeys& grid, std::size_t n_points, double tolerance_deg) {
    const std::string file = write_grid(grid, n_points);
    InputDataset input({file}, {});
    std::vector<double> lat, lon;
    input.column_lat_lon(lat, lon);
    ASSERT_EQ(lat.size(), n_points);
    Handle h = make_message(grid, 130, 1000, 20240101, 1200, 0, std::vector<double>(n_points, 280.0));
    std::vector<double> ref_lat, ref_lon;
    reference_points(h, ref_lat, ref_lon);
    ColumnBlock block;
    input.read_block(0, {0, input.grid().n_columns}, block);
    const int nz = block.n_levels;
    ASSERT_EQ(nz, 4);
    const int level_1000 = input.grid().pressure_pa[0] == 100000.0 ? 0 : 3;
    for (std::size_t k = 0; k < n_points; ++k) {
      // Find our column at ecCodes' point k; it must hold the temperature written for point k.
      std::size_t best = 0;
      double best_d = 1e9;
      for (std::size_t c = 0; c < lat.size(); ++c) {
        double dlon = std::remainder(lon[c] - ref_lon[k], 360.0);
        double d = std::hypot(lat[c] - ref_lat[k], dlon * std::cos(ref_lat[k] * M_PI / 180.0));
        if (d < best_d) {
          best_d = d;
          best = c;
        }
      }
      EXPECT_LT(best_d, tolerance_deg) << "point " << k;
      EXPECT_NEAR(block.temp_k[best * nz + level_1000], temp_of(k, 0), 1e-3) << "point " << k;
    }
  }
};

GridKeys regular_ll(long scanning_mode) {
  // 5 x 4 points, 10 degrees apart; first/last points follow the scanning directions.
  const bool i_neg = scanning_mode & 128, j_pos = scanning_mode & 64;
  return {{{"gridDefinitionTemplateNumber", 0}, {"Ni", 5}, {"Nj", 4}, {"scanningMode", scanning_mode}},
          {{"latitudeOfFirstGridPointInDegrees", j_pos ? 10.0 : 40.0},
           {"latitudeOfLastGridPointInDegrees", j_pos ? 40.0 : 10.0},
           {"longitudeOfFirstGridPointInDegrees", i_neg ? 60.0 : 20.0},
           {"longitudeOfLastGridPointInDegrees", i_neg ? 20.0 : 60.0},
           {"iDirectionIncrementInDegrees", 10.0},
           {"jDirectionIncrementInDegrees", 10.0}},
          "regular_ll"};
}

// GRIB2 stores angles in microdegrees (WMO-No. 306 template 3.0): positions agree to about 1e-6 degree.
TEST_F(GribInput, RegularLatLonDefaultScanningMatchesEcCodesPoints) { expect_points_match(regular_ll(0), 20, 2e-6); }
TEST_F(GribInput, RegularLatLonSouthToNorthMatchesEcCodesPoints) { expect_points_match(regular_ll(64), 20, 2e-6); }
TEST_F(GribInput, RegularLatLonEastToWestMatchesEcCodesPoints) { expect_points_match(regular_ll(128), 20, 2e-6); }
TEST_F(GribInput, RegularLatLonColumnMajorMatchesEcCodesPoints) { expect_points_match(regular_ll(32), 20, 2e-6); }
TEST_F(GribInput, RegularLatLonAlternateRowsMatchesEcCodesPoints) { expect_points_match(regular_ll(16), 20, 2e-6); }

TEST_F(GribInput, LambertConformalMatchesEcCodesPoints) {
  // Like NCEP grid 211 (WMO-No. 306 template 3.30), 6 x 5 points of 81.271 km.
  GridKeys g{{{"gridDefinitionTemplateNumber", 30}, {"Nx", 6}, {"Ny", 5}, {"scanningMode", 64},
              {"shapeOfTheEarth", 6}},
             {{"latitudeOfFirstGridPointInDegrees", 30.0}, {"longitudeOfFirstGridPointInDegrees", 250.0},
              {"LaDInDegrees", 25.0}, {"LoVInDegrees", 265.0}, {"Latin1InDegrees", 25.0}, {"Latin2InDegrees", 25.0},
              {"DxInMetres", 81271.0}, {"DyInMetres", 81271.0}},
             "lambert"};
  expect_points_match(g, 30, 1e-4);  // about 10 m
}

TEST_F(GribInput, PolarStereographicMatchesEcCodesPoints) {
  GridKeys g{{{"gridDefinitionTemplateNumber", 20}, {"Nx", 6}, {"Ny", 5}, {"scanningMode", 64},
              {"shapeOfTheEarth", 6}},
             {{"latitudeOfFirstGridPointInDegrees", 50.0}, {"longitudeOfFirstGridPointInDegrees", 240.0},
              {"LaDInDegrees", 60.0}, {"orientationOfTheGridInDegrees", 255.0},
              {"DxInMetres", 95250.0}, {"DyInMetres", 95250.0}},
             "polar_stereographic"};
  expect_points_match(g, 30, 1e-4);
}

TEST_F(GribInput, MercatorMatchesEcCodesPoints) {
  GridKeys g{{{"gridDefinitionTemplateNumber", 10}, {"Ni", 6}, {"Nj", 5}, {"scanningMode", 64},
              {"shapeOfTheEarth", 6}},
             {{"latitudeOfFirstGridPointInDegrees", 10.0}, {"longitudeOfFirstGridPointInDegrees", 100.0},
              {"LaDInDegrees", 20.0}, {"DiInMetres", 50000.0}, {"DjInMetres", 50000.0},
              {"latitudeOfLastGridPointInDegrees", 11.7}, {"longitudeOfLastGridPointInDegrees", 102.3}},
             "mercator"};
  expect_points_match(g, 30, 1e-4);
}

TEST_F(GribInput, RotatedLatLonMatchesEcCodesPoints) {
  GridKeys g{{{"gridDefinitionTemplateNumber", 1}, {"Ni", 5}, {"Nj", 4}, {"scanningMode", 64}},
             {{"latitudeOfFirstGridPointInDegrees", -5.0}, {"latitudeOfLastGridPointInDegrees", 10.0},
              {"longitudeOfFirstGridPointInDegrees", 350.0}, {"longitudeOfLastGridPointInDegrees", 10.0},
              {"iDirectionIncrementInDegrees", 5.0}, {"jDirectionIncrementInDegrees", 5.0},
              {"latitudeOfSouthernPoleInDegrees", -40.0}, {"longitudeOfSouthernPoleInDegrees", 10.0}},
             "rotated_ll"};
  expect_points_match(g, 20, 1e-5);  // two implementations of the pole rotation (ecCodes, PROJ ob_tran): ~1 m
}

TEST_F(GribInput, RegularGaussianMatchesEcCodesPoints) {
  // N = 2: 8 latitudes, here all 8 rows and 16 longitudes of 22.5 degrees.
  GridKeys g{{{"gridDefinitionTemplateNumber", 40}, {"Ni", 16}, {"Nj", 4}, {"N", 2}, {"scanningMode", 0}},
             {{"longitudeOfFirstGridPointInDegrees", 0.0}, {"longitudeOfLastGridPointInDegrees", 337.5},
              {"iDirectionIncrementInDegrees", 22.5}},
             "regular_gg"};  // positions: 2e-6 degree as above
  // Latitudes of N=2 (from ecCodes' own table, read back rather than typed in).
  Handle probe(codes_grib_handle_new_from_samples(nullptr, "GRIB2"));
  std::vector<double> lats(4);
  ok(codes_get_gaussian_latitudes(2, lats.data()), "gaussian latitudes");
  g.doubles.push_back({"latitudeOfFirstGridPointInDegrees", lats[0]});
  g.doubles.push_back({"latitudeOfLastGridPointInDegrees", lats[3]});
  g.longs[2].second = 4;  // Nj: every row of N = 2
  expect_points_match(g, 64, 2e-6);
}

TEST_F(GribInput, BitmapPointsAreMissing) {
  const std::string file = write_grid(regular_ll(0), 20, true);
  InputDataset input({file}, {});
  ColumnBlock block;
  input.read_block(0, {0, 20}, block);
  const int level_1000 = input.grid().pressure_pa[0] == 100000.0 ? 0 : 3;
  EXPECT_TRUE(std::isnan(block.temp_k[1 * 4 + level_1000]));
  EXPECT_NEAR(block.temp_k[2 * 4 + level_1000], temp_of(2, 0), 1e-3);
}

TEST_F(GribInput, ValidityTimesAndMembersBecomeDimensions) {
  GridKeys g = regular_ll(0);
  const std::string a = path("a.grib2"), b = path("b.grib2");
  std::map<std::string, bool> started;
  for (long member : {1, 2})
    for (long hour : {0, 600})
      for (std::size_t l = 0; l < kLevels.size(); ++l) {
        const std::string& file = hour == 0 ? a : b;  // times split across two files
        std::vector<double> t(20, 280.0 - l + member + hour / 100.0), r(20, 50.0), z(20, 1000.0 * l);
        append(file, make_message(g, 130, kLevels[l], 20240101, hour, member, t), !started[file]);
        started[file] = true;
        append(file, make_message(g, 157, kLevels[l], 20240101, hour, member, r), false);
        append(file, make_message(g, 156, kLevels[l], 20240101, hour, member, z), false);
      }
  InputDataset input({b, a}, {});
  const GridDescription& grid = input.grid();
  EXPECT_EQ(grid.n_times, 2u);
  ASSERT_EQ(grid.time_values.size(), 2u);
  EXPECT_EQ(grid.time_values[1] - grid.time_values[0], 6 * 3600.0);
  EXPECT_EQ(grid.n_steps, 4u);  // 2 times x 2 members
  ColumnBlock block;
  input.read_block(3, {0, 20}, block);  // time 06 UTC, member 2
  EXPECT_NEAR(block.temp_k[0], 280.0 + 2 + 6, 1e-3);
}

TEST_F(GribInput, LevelsInPascalAndInHectopascalAreMatchedByValue) {
  // Relative humidity on isobaricInPa levels (WMO code table 4.5: 100, isobaric surface, Pa), the rest in hPa.
  GridKeys g = regular_ll(0);
  const std::string file = path("mixed_units.grib2");
  bool first = true;
  for (std::size_t l = 0; l < kLevels.size(); ++l) {
    std::vector<double> t(20, 290.0 - 10.0 * l), r(20, 40.0 + 10.0 * l), z(20, 100.0 + 1500.0 * l);
    append(file, make_message(g, 130, kLevels[l], 20240101, 1200, 0, t), first);
    first = false;
    append(file, make_message(g, 156, kLevels[l], 20240101, 1200, 0, z), false);
    Handle h = make_message(g, 157, kLevels[l], 20240101, 1200, 0, r);
    ok(codes_set_string(h.get(), "typeOfLevel", "isobaricInPa", nullptr), "typeOfLevel");
    ok(codes_set_long(h.get(), "level", kLevels[l] * 100), "level");
    ok(codes_set_double_array(h.get(), "values", r.data(), r.size()), "values");
    append(file, h, false);
  }
  InputDataset input({file}, {});
  ASSERT_EQ(input.grid().pressure_pa.size(), 4u);
  EXPECT_TRUE(input.common_levels_note().empty()) << input.common_levels_note();
  ColumnBlock block;
  input.read_block(0, {0, 20}, block);
  for (std::size_t k = 0; k < 4; ++k) {  // the level of pressure p holds the humidity written for p
    const double p_hpa = input.grid().pressure_pa[k] / 100.0;
    const std::size_t l = std::find(kLevels.begin(), kLevels.end(), static_cast<long>(p_hpa)) - kLevels.begin();
    EXPECT_NEAR(block.humidity[k], (40.0 + 10.0 * l) / 100.0, 1e-6) << p_hpa << " hPa";
  }
}

TEST_F(GribInput, ReducedGaussianGridIsRefusedNamingIt) {
  Handle h(codes_grib_handle_new_from_samples(nullptr, "reduced_gg_pl_32_grib2"));
  ASSERT_TRUE(h);
  ok(codes_set_long(h.get(), "paramId", 130), "paramId");
  ok(codes_set_string(h.get(), "typeOfLevel", "isobaricInhPa", nullptr), "typeOfLevel");
  ok(codes_set_long(h.get(), "level", 850), "level");
  append(path("rgg.grib2"), h, true);
  try {
    InputDataset input({path("rgg.grib2")}, {});
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("reduced_gg"), std::string::npos) << e.what();
  }
}

TEST_F(GribInput, MissingParameterListsWhatWasLookedFor) {
  GridKeys g = regular_ll(0);
  append(path("r_only.grib2"), make_message(g, 157, 850, 20240101, 0, 0, std::vector<double>(20, 50.0)), true);
  try {
    InputDataset input({path("r_only.grib2")}, {});
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("paramId 130"), std::string::npos) << e.what();
  }
}

TEST_F(GribInput, IsRecognisedByContentNotByName) {
  const std::string file = write_grid(regular_ll(0), 20);
  std::rename(file.c_str(), path("model_output.nc").c_str());
  EXPECT_TRUE(is_grib_input(path("model_output.nc")));
  EXPECT_NO_THROW(InputDataset({path("model_output.nc")}, {}));
}

}  // namespace
}  // namespace latentlift
