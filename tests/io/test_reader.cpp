// The NetCDF reader: finding variables, units, packing, fill values, dimension orders,
// level order, the orography trap, block reading, several files, and its errors.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>

#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Att;
using test::Index;
using test::SmallGrid;
using test::Var;

using test::kGravity;
using test::kZeroCelsiusK;

InputAliases no_aliases() { return {}; }

/// Value of a ColumnBlock array at grid column (lat j, lon i) and level k for a 3x4 grid.
double at(const std::vector<double>& values, int n_levels, int j, int i, int k) {
  return values[(j * 4 + i) * n_levels + k];
}

Index idx(std::size_t t, std::size_t k, std::size_t j, std::size_t i) {
  return {{"time", t}, {"level", k}, {"lat", j}, {"lon", i}};
}

class Reader : public ::testing::Test {
 protected:
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path(const std::string& name) const { return dir + "/" + name; }
  SmallGrid grid;
};

TEST_F(Reader, FindsQuantitiesByStandardNameWhateverTheVariableNames) {
  test::write_nc(path("in.nc"), grid.dims, grid.standard());
  InputDataset input({path("in.nc")}, no_aliases());
  std::vector<QuantitySource> sources = input.sources();
  ASSERT_EQ(sources.size(), 3u);
  EXPECT_EQ(sources[0].variable, "temp");
  EXPECT_EQ(sources[1].variable, "hum");
  EXPECT_EQ(sources[2].variable, "height");
  EXPECT_EQ(input.humidity_kind(), HumidityKind::specific_humidity);
}

TEST_F(Reader, FindsQuantitiesByConfiguredAliasesWithoutStandardNames) {
  std::vector<Var> vars = grid.coordinates();
  vars.push_back(grid.var("t", "", "K", SmallGrid::temp_k));
  vars.push_back(grid.var("q", "", "kg/kg", SmallGrid::q));
  vars.push_back(grid.var("gh", "", "m", SmallGrid::z_m));
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputAliases aliases = {{"air_temperature", {"t"}}, {"specific_humidity", {"q"}}, {"geopotential_height", {"gh"}}};
  InputDataset input({path("in.nc")}, aliases);
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_DOUBLE_EQ(at(block.temp_k, 4, 2, 3, 1), static_cast<float>(SmallGrid::temp_k(idx(0, 1, 2, 3))));
}

TEST_F(Reader, ConvertsCelsiusToKelvin) {
  std::vector<Var> vars = grid.standard();
  vars[4] = grid.var("temp", "air_temperature", "degC", [](const Index& i) { return SmallGrid::temp_k(i) - kZeroCelsiusK; });
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(1, {0, 12}, block);
  const double celsius = static_cast<float>(SmallGrid::temp_k(idx(1, 2, 1, 1)) - kZeroCelsiusK);
  EXPECT_NEAR(at(block.temp_k, 4, 1, 1, 2), celsius + kZeroCelsiusK, 1e-9);
}

TEST_F(Reader, ConvertsGramsPerKilogramToKilogramsPerKilogram) {
  std::vector<Var> vars = grid.standard();
  vars[5] = grid.var("hum", "specific_humidity", "g/kg", [](const Index& i) { return 1000.0 * SmallGrid::q(i); });
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_NEAR(at(block.humidity, 4, 0, 2, 0), SmallGrid::q(idx(0, 0, 0, 2)), 1e-7);
}

TEST_F(Reader, ConvertsRelativeHumidityInPercentToAFraction) {
  std::vector<Var> vars = grid.standard();
  vars[5] = grid.var("rh", "relative_humidity", "%", [](const Index& i) { return 50.0 + 10.0 * i.at("level"); });
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.humidity_kind(), HumidityKind::relative_humidity);
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_NEAR(at(block.humidity, 4, 1, 1, 3), 0.80, 1e-12);  // 80 % (1 % = 0.01, SI brochure)
}

TEST_F(Reader, DividesGeopotentialByStandardGravity) {
  std::vector<Var> vars = grid.standard();
  vars[6] = grid.var("z", "geopotential", "m2 s-2", [](const Index& i) { return kGravity * SmallGrid::z_m(i); });
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  const double stored = static_cast<float>(kGravity * SmallGrid::z_m(idx(0, 3, 2, 1)));
  EXPECT_NEAR(at(block.height_m, 4, 2, 1, 3), stored / kGravity, 1e-9);
}

TEST_F(Reader, FindsThePressureDimensionByItsUnitsAlone) {
  // A `level` coordinate in "millibars", no axis or positive attribute (grib_to_netcdf style).
  std::vector<Var> vars = grid.standard();
  vars[1] = {"level", NC_INT, {"level"}, {{"units", "millibars"}, {"long_name", "pressure_level"}}, grid.levels_hpa};
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.grid().vertical.name, "level");
  EXPECT_EQ(input.grid().pressure_pa, (std::vector<double>{100000, 85000, 70000, 50000}));  // 1 mbar = 100 Pa
}

TEST_F(Reader, KeepsAscendingPressureLevelsInTheInputOrder) {
  SmallGrid up;
  up.levels_hpa = {500, 700, 850, 1000};
  std::vector<Var> vars = up.standard();
  vars[1].atts = {{"units", "Pa"}};
  vars[1].data = {50000, 70000, 85000, 100000};
  vars[6] = up.var("height", "geopotential_height", "m", [](const Index& i) {  // heights follow the pressures
    Index flipped = i;
    flipped["level"] = 3 - i.at("level");
    return SmallGrid::z_m(flipped);
  });
  test::write_nc(path("in.nc"), up.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.grid().pressure_pa, (std::vector<double>{50000, 70000, 85000, 100000}));
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_DOUBLE_EQ(at(block.temp_k, 4, 0, 0, 3), static_cast<float>(SmallGrid::temp_k(idx(0, 3, 0, 0))));
}

TEST_F(Reader, UnpacksScaleFactorAndAddOffsetInDouble) {
  std::vector<Var> vars = grid.standard();
  const double scale = 0.002, offset = 280.0;
  Var t{"temp", NC_SHORT, {"time", "level", "lat", "lon"},
        {{"units", "K"}, {"standard_name", "air_temperature"}, {"scale_factor", "", {scale}, NC_DOUBLE}, {"add_offset", "", {offset}, NC_DOUBLE}},
        test::fill(grid.dims, {"time", "level", "lat", "lon"},
                   [&](const Index& i) { return std::round((SmallGrid::temp_k(i) - offset) / scale); })};
  vars[4] = t;
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  const double packed = std::round((SmallGrid::temp_k(idx(0, 1, 2, 2)) - offset) / scale);
  EXPECT_NEAR(at(block.temp_k, 4, 2, 2, 1), packed * scale + offset, 1e-9);  // CF 1.8 sec. 8.1 unpacking
}

TEST_F(Reader, MarksFillValueAndMissingValueAsNaN) {
  std::vector<Var> vars = grid.standard();
  vars[4].atts.push_back({"_FillValue", "", {-999.0}});
  vars[4].data[0] = -999.0;  // time 0, level 0, lat 0, lon 0
  vars[5].atts.push_back({"missing_value", "", {-1.0}});
  vars[5].data[1] = -1.0;  // time 0, level 0, lat 0, lon 1
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_TRUE(std::isnan(at(block.temp_k, 4, 0, 0, 0)));
  EXPECT_TRUE(std::isnan(at(block.humidity, 4, 0, 1, 0)));
  EXPECT_FALSE(std::isnan(at(block.temp_k, 4, 0, 1, 0)));
}

TEST_F(Reader, MarksEveryValueOfAMissingValueListAsNaN) {
  // CF conventions 2.5.1: missing_value may be a vector; every value in it marks missing data.
  // A NaN among them adds nothing (NaN is missing anyway) and is accepted.
  std::vector<Var> vars = grid.standard();
  vars[4].atts.push_back({"missing_value", "", {-999.0, -888.0, std::nan("")}});
  vars[4].data[0] = -999.0;  // time 0, level 0, lat 0, lon 0
  vars[4].data[1] = -888.0;  // time 0, level 0, lat 0, lon 1
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_TRUE(std::isnan(at(block.temp_k, 4, 0, 0, 0)));
  EXPECT_TRUE(std::isnan(at(block.temp_k, 4, 0, 1, 0)));
  EXPECT_FALSE(std::isnan(at(block.temp_k, 4, 0, 2, 0)));
}

TEST_F(Reader, GivesTheSameColumnsWhateverTheDimensionOrder) {
  test::write_nc(path("a.nc"), grid.dims, grid.standard());
  std::vector<Var> vars = grid.coordinates();
  vars.push_back(grid.var("temp", "air_temperature", "K", SmallGrid::temp_k, {"lon", "level", "time", "lat"}));
  vars.push_back(grid.var("hum", "specific_humidity", "1", SmallGrid::q, {"time", "lat", "lon", "level"}));
  vars.push_back(grid.var("height", "geopotential_height", "m", SmallGrid::z_m, {"level", "lon", "lat", "time"}));
  test::write_nc(path("b.nc"), grid.dims, vars);
  InputDataset a({path("a.nc")}, no_aliases());
  InputDataset b({path("b.nc")}, no_aliases());
  EXPECT_EQ(b.grid().horizontal.size(), 2u);
  ColumnBlock ba, bb;
  for (std::size_t step = 0; step < 2; ++step) {
    a.read_block(step, {0, 12}, ba);
    b.read_block(step, {0, 12}, bb);
    if (b.grid().horizontal[0].name == "lat") {
      EXPECT_EQ(ba.temp_k, bb.temp_k);
      EXPECT_EQ(ba.humidity, bb.humidity);
      EXPECT_EQ(ba.height_m, bb.height_m);
    }
  }
  // b's temperature has lon before lat: its columns run over lon first, so compare by position.
  const GridDescription& g = b.grid();
  ASSERT_EQ(g.horizontal[0].name, "lon");
  b.read_block(1, {0, 12}, bb);
  for (int i = 0; i < 4; ++i)
    for (int j = 0; j < 3; ++j)
      EXPECT_DOUBLE_EQ(bb.temp_k[(i * 3 + j) * 4 + 2], static_cast<float>(SmallGrid::temp_k(idx(1, 2, j, i))));
}

TEST_F(Reader, NeverTakesATwoDimensionalFieldSharingTheStandardNameForTheProfile) {
  // Orography tagged geopotential_height comes first in the file; the 3-D field must win.
  std::vector<Var> vars = grid.coordinates();
  vars.push_back({"orog", NC_FLOAT, {"time", "lat", "lon"}, {{"units", "m"}, {"standard_name", "geopotential_height"}},
                  std::vector<double>(24, 350.0)});
  std::vector<Var> rest = grid.standard();
  vars.insert(vars.end(), rest.begin() + 4, rest.end());
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.sources()[2].variable, "height");
}

TEST_F(Reader, ReadsBlocksThatMatchTheWholeGrid) {
  test::write_nc(path("in.nc"), grid.dims, grid.standard());
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock whole, part;
  input.read_block(1, {0, 12}, whole);
  for (std::size_t block_columns : {1u, 3u, 4u, 8u, 100u}) {
    for (const ColumnRange& range : column_blocks(input.grid(), block_columns)) {
      ASSERT_LE(range.count, block_columns);
      input.read_block(1, range, part);
      for (std::size_t c = 0; c < range.count; ++c)
        for (int k = 0; k < 4; ++k)
          EXPECT_EQ(part.temp_k[c * 4 + k], whole.temp_k[(range.begin + c) * 4 + k]) << block_columns;
    }
  }
}

TEST_F(Reader, ReadsDeflatedInputChunkedByLevelMapsBlockByBlock) {
  std::vector<Var> vars = grid.standard();
  for (std::size_t v = 4; v < 7; ++v) {
    vars[v].chunks = {1, 1, 3, 4};
    vars[v].deflate_level = 4;
  }
  test::write_nc(path("deflated.nc"), grid.dims, vars);
  test::write_nc(path("plain.nc"), grid.dims, grid.standard());
  InputDataset deflated({path("deflated.nc")}, no_aliases());
  InputDataset plain({path("plain.nc")}, no_aliases());
  deflated.prepare_block_reads(4);
  ColumnBlock a, b;
  for (const ColumnRange& range : column_blocks(deflated.grid(), 4)) {
    deflated.read_block(1, range, a);
    plain.read_block(1, range, b);
    EXPECT_EQ(a.temp_k, b.temp_k);
    EXPECT_EQ(a.humidity, b.humidity);
    EXPECT_EQ(a.height_m, b.height_m);
  }
}

TEST_F(Reader, AcceptsInputWithoutATimeDimension) {
  SmallGrid g;
  g.dims = {{"level", 4}, {"lat", 3}, {"lon", 4}};
  std::vector<Var> vars = g.coordinates();
  vars.erase(vars.begin());
  auto no_time = [](std::function<double(const Index&)> f) {
    return [f](const Index& i) { Index j = i; j["time"] = 0; return f(j); };
  };
  vars.push_back(g.var("temp", "air_temperature", "K", no_time(SmallGrid::temp_k), {"level", "lat", "lon"}));
  vars.push_back(g.var("hum", "specific_humidity", "1", no_time(SmallGrid::q), {"level", "lat", "lon"}));
  vars.push_back(g.var("height", "geopotential_height", "m", no_time(SmallGrid::z_m), {"level", "lat", "lon"}));
  test::write_nc(path("in.nc"), g.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.grid().n_steps, 1u);
  EXPECT_TRUE(input.grid().outer.empty());
}

TEST_F(Reader, ReadsUnstructuredCellsWithLatLonAuxiliaryCoordinates) {
  test::Dims dims = {{"time", 1}, {"plev", 3}, {"ncells", 5}};
  auto f = [](const Index& i) { return 280.0 - 10.0 * i.at("plev") + i.at("ncells"); };
  std::vector<Var> vars = {
      {"plev", NC_DOUBLE, {"plev"}, {{"units", "Pa"}}, {100000, 85000, 70000}},
      {"clat", NC_DOUBLE, {"ncells"}, {{"units", "degrees_north"}}, {0, 10, 20, 30, 40}},
      {"clon", NC_DOUBLE, {"ncells"}, {{"units", "degrees_east"}}, {5, 15, 25, 35, 45}},
      {"ta", NC_FLOAT, {"time", "plev", "ncells"}, {{"units", "K"}, {"standard_name", "air_temperature"}, {"coordinates", "clat clon"}}, test::fill(dims, {"time", "plev", "ncells"}, f)},
      {"hus", NC_FLOAT, {"time", "plev", "ncells"}, {{"units", "1"}, {"standard_name", "specific_humidity"}, {"coordinates", "clat clon"}}, std::vector<double>(15, 0.005)},
      {"zg", NC_FLOAT, {"time", "plev", "ncells"}, {{"units", "m"}, {"standard_name", "geopotential_height"}, {"coordinates", "clat clon"}}, std::vector<double>(15, 1000.0)},
  };
  test::write_nc(path("in.nc"), dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  EXPECT_EQ(input.grid().kind, HorizontalKind::unstructured);
  EXPECT_EQ(input.grid().n_columns, 5u);
  ColumnBlock block;
  input.read_block(0, {2, 3}, block);
  EXPECT_DOUBLE_EQ(block.temp_k[0 * 3 + 1], 272.0);  // cell 2, level 1
  std::vector<double> lat, lon;
  input.column_lat_lon(lat, lon);
  EXPECT_EQ(lat[3], 30.0);
  EXPECT_EQ(lon[3], 35.0);
}

TEST_F(Reader, ReadsProjectedGridsWithTwoDimensionalLatLonAndGridMapping) {
  test::Dims dims = {{"plev", 3}, {"y", 2}, {"x", 3}};
  auto lat = [](const Index& i) { return 40.0 + i.at("y") + 0.1 * i.at("x"); };
  auto lon = [](const Index& i) { return 5.0 + i.at("x") - 0.1 * i.at("y"); };
  std::vector<Var> vars = {
      {"plev", NC_DOUBLE, {"plev"}, {{"units", "hPa"}}, {1000, 850, 700}},
      {"x", NC_DOUBLE, {"x"}, {{"units", "m"}, {"standard_name", "projection_x_coordinate"}}, {0, 1000, 2000}},
      {"y", NC_DOUBLE, {"y"}, {{"units", "m"}, {"standard_name", "projection_y_coordinate"}}, {0, 1000}},
      {"lat", NC_DOUBLE, {"y", "x"}, {{"units", "degrees_north"}}, test::fill(dims, {"y", "x"}, lat)},
      {"lon", NC_DOUBLE, {"y", "x"}, {{"units", "degrees_east"}}, test::fill(dims, {"y", "x"}, lon)},
      {"lambert", NC_INT, {}, {{"grid_mapping_name", "lambert_conformal_conic"}, {"standard_parallel", "", {45.0}}}, {}},
      {"t", NC_FLOAT, {"plev", "y", "x"}, {{"units", "K"}, {"grid_mapping", "lambert"}, {"coordinates", "lat lon"}}, std::vector<double>(18, 280.0)},
      {"q", NC_FLOAT, {"plev", "y", "x"}, {{"units", "kg kg-1"}, {"grid_mapping", "lambert"}}, std::vector<double>(18, 0.004)},
      {"z", NC_FLOAT, {"plev", "y", "x"}, {{"units", "m2 s-2"}, {"grid_mapping", "lambert"}}, std::vector<double>(18, 9806.65)},
  };
  test::write_nc(path("in.nc"), dims, vars);
  InputDataset input({path("in.nc")}, {{"air_temperature", {"t"}}, {"specific_humidity", {"q"}}, {"geopotential", {"z"}}});
  EXPECT_EQ(input.grid().kind, HorizontalKind::projected);
  EXPECT_EQ(input.grid().grid_mapping, "lambert");
  std::vector<double> lats, lons;
  input.column_lat_lon(lats, lons);
  EXPECT_DOUBLE_EQ(lats[1 * 3 + 2], 41.2);
  EXPECT_DOUBLE_EQ(lons[1 * 3 + 2], 6.9);
  ColumnBlock block;
  input.read_block(0, {0, 6}, block);
  EXPECT_NEAR(block.height_m[0], 1000.0, 1e-3);  // 9806.65 m2 s-2 stored as float
}

TEST_F(Reader, DerivesLatLonOfAProjectedGridWithoutThemFromTheGridMapping) {
  test::Dims dims = {{"plev", 3}, {"y", 2}, {"x", 3}};
  std::vector<Var> vars = {
      {"plev", NC_DOUBLE, {"plev"}, {{"units", "hPa"}}, {1000, 850, 700}},
      {"x", NC_DOUBLE, {"x"}, {{"units", "km"}, {"standard_name", "projection_x_coordinate"}}, {0, 50, 100}},
      {"y", NC_DOUBLE, {"y"}, {{"units", "km"}, {"standard_name", "projection_y_coordinate"}}, {100, 200}},
      {"lcc", NC_INT, {}, {{"grid_mapping_name", "lambert_conformal_conic"}, {"standard_parallel", "", {35.0, 47.0}, NC_DOUBLE},
                           {"longitude_of_central_meridian", "", {10.0}, NC_DOUBLE}, {"latitude_of_projection_origin", "", {40.0}, NC_DOUBLE},
                           {"earth_radius", "", {6371229.0}, NC_DOUBLE}}, {}},
      {"t", NC_FLOAT, {"plev", "y", "x"}, {{"units", "K"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 280.0)},
      {"q", NC_FLOAT, {"plev", "y", "x"}, {{"units", "kg kg-1"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 0.004)},
      {"z", NC_FLOAT, {"plev", "y", "x"}, {{"units", "m"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 1000.0)},
  };
  test::write_nc(path("in.nc"), dims, vars);
  InputDataset input({path("in.nc")}, {{"air_temperature", {"t"}}, {"specific_humidity", {"q"}}, {"geopotential_height", {"z"}}});
  std::vector<double> lats, lons;
  input.column_lat_lon(lats, lons);
  ASSERT_EQ(lats.size(), 6u);
  // x = 100 km, y = 200 km, by PROJ's cs2cs: echo "100000 200000" | cs2cs +proj=lcc +lat_1=35 +lat_2=47
  //   +lat_0=40 +lon_0=10 +R=6371229 +units=m +to +proj=longlat +R=6371229 -f %.6f  ->  11.212966 41.802120
  EXPECT_NEAR(lats[1 * 3 + 2], 41.802120, 1e-5);
  EXPECT_NEAR(lons[1 * 3 + 2], 11.212966, 1e-5);
}

TEST_F(Reader, JoinsSeveralFilesAlongTime) {
  SmallGrid g;
  std::vector<Var> first = g.standard(), second = g.standard();
  second[0].data = {12, 18};
  for (std::size_t v : {4, 6})  // temperature and height (a humidity of 1 kg/kg would be implausible)
    for (double& x : second[v].data) x += 1.0;
  test::write_nc(path("a.nc"), g.dims, first);
  test::write_nc(path("b.nc"), g.dims, second);
  InputDataset input({path("a.nc"), path("b.nc")}, no_aliases());
  EXPECT_EQ(input.grid().n_times, 4u);
  EXPECT_EQ(input.grid().time_values, (std::vector<double>{0, 6, 12, 18}));
  ColumnBlock block;
  input.read_block(3, {0, 12}, block);
  EXPECT_DOUBLE_EQ(block.temp_k[0], static_cast<float>(SmallGrid::temp_k(idx(1, 0, 0, 0)) + 1.0));
}

TEST_F(Reader, TakesSurfacePressureFromASeparateFile) {
  test::write_nc(path("pl.nc"), grid.dims, grid.standard());
  std::vector<Var> sfc = grid.coordinates();
  sfc.erase(sfc.begin() + 1);  // no level coordinate in the surface file
  sfc.push_back(grid.var("sp", "surface_air_pressure", "Pa", [](const Index& i) { return 95000.0 + 100.0 * i.at("lon"); },
                         {"time", "lat", "lon"}));
  test::write_nc(path("sfc.nc"), {{"time", 2}, {"lat", 3}, {"lon", 4}}, sfc);
  InputDataset input({path("pl.nc"), path("sfc.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  ASSERT_EQ(block.surface_pressure_pa.size(), 12u);
  EXPECT_DOUBLE_EQ(block.surface_pressure_pa[3], 95300.0);
}

TEST_F(Reader, PairsOneSurfaceFileWithAllTimesWithOneFilePerTimeStep) {
  SmallGrid one;
  one.dims = {{"time", 1}, {"level", 4}, {"lat", 3}, {"lon", 4}};
  for (int t = 0; t < 2; ++t) {
    std::vector<Var> vars = one.standard();
    vars[0].data = {6.0 * t};
    for (std::size_t v : {4, 6})  // temperature and height (a humidity of 1 kg/kg would be implausible)
      for (double& x : vars[v].data) x += t;
    test::write_nc(path("pl" + std::to_string(t) + ".nc"), one.dims, vars);
  }
  std::vector<Var> sfc = grid.coordinates();
  sfc.erase(sfc.begin() + 1);
  sfc.push_back(grid.var("sp", "surface_air_pressure", "Pa", [](const Index& i) { return 95000.0 + 1000.0 * i.at("time"); },
                         {"time", "lat", "lon"}));
  test::write_nc(path("sfc.nc"), {{"time", 2}, {"lat", 3}, {"lon", 4}}, sfc);
  InputDataset input({path("pl0.nc"), path("pl1.nc"), path("sfc.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(1, {0, 12}, block);
  EXPECT_DOUBLE_EQ(block.surface_pressure_pa[5], 96000.0);
  EXPECT_DOUBLE_EQ(block.temp_k[0], static_cast<float>(SmallGrid::temp_k(idx(0, 0, 0, 0))) + 1.0);
}

// ---- errors: InputError naming file, variable and expectation

TEST_F(Reader, MissingHumidityListsWhatWasLookedFor) {
  std::vector<Var> vars = grid.standard();
  vars.erase(vars.begin() + 5);
  test::write_nc(path("in.nc"), grid.dims, vars);
  try {
    InputDataset input({path("in.nc")}, {{"specific_humidity", {"q", "hus"}}});
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    std::string what = e.what();
    EXPECT_NE(what.find("in.nc"), std::string::npos) << what;
    EXPECT_NE(what.find("specific_humidity"), std::string::npos) << what;
    EXPECT_NE(what.find("relative_humidity"), std::string::npos) << what;
    EXPECT_NE(what.find("hus"), std::string::npos) << what;
  }
}

TEST_F(Reader, UnitsThatAreNotATemperatureAreAnInputError) {
  std::vector<Var> vars = grid.standard();
  vars[4].atts[0].text = "m s-1";
  test::write_nc(path("in.nc"), grid.dims, vars);
  try {
    InputDataset input({path("in.nc")}, no_aliases());
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_EQ(e.variable(), "temp");
    EXPECT_NE(std::string(e.what()).find("'K'"), std::string::npos) << e.what();
  }
}

TEST_F(Reader, UnknownUnitsAreAnInputError) {
  std::vector<Var> vars = grid.standard();
  vars[6].atts[0].text = "furlongs per fortnight squared";
  test::write_nc(path("in.nc"), grid.dims, vars);
  EXPECT_THROW(InputDataset({path("in.nc")}, no_aliases()), InputError);
}

TEST_F(Reader, NoPressureDimensionIsAnInputError) {
  std::vector<Var> vars = grid.standard();
  vars[1].atts[0].text = "m";  // a height coordinate, not pressure
  test::write_nc(path("in.nc"), grid.dims, vars);
  try {
    InputDataset input({path("in.nc")}, no_aliases());
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("pressure"), std::string::npos) << e.what();
  }
}

TEST_F(Reader, AFileThatIsNotNetcdfIsAnInputError) {
  std::ofstream(path("in.nc")) << "this is not a NetCDF file\n";
  try {
    InputDataset input({path("in.nc")}, no_aliases());
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_EQ(e.file(), path("in.nc"));
  }
}

TEST_F(Reader, ATruncatedFileIsAnInputError) {
  test::write_nc(path("full.nc"), grid.dims, grid.standard(), NC_CLOBBER | NC_64BIT_OFFSET);
  std::ifstream in(path("full.nc"), std::ios::binary);
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  std::ofstream(path("cut.nc"), std::ios::binary) << bytes.substr(0, bytes.size() / 2);
  EXPECT_THROW(
      {
        InputDataset input({path("cut.nc")}, no_aliases());
        ColumnBlock block;
        for (std::size_t step = 0; step < input.grid().n_steps; ++step) input.read_block(step, {0, 12}, block);
      },
      InputError);
}

TEST_F(Reader, MismatchedGridsAcrossFilesAreAnInputError) {
  test::write_nc(path("pl.nc"), grid.dims, grid.standard());
  std::vector<Var> sfc = grid.coordinates();
  sfc.erase(sfc.begin() + 1);
  sfc[1].data = {-10, -11, -12};  // other latitudes
  sfc.push_back(grid.var("sp", "surface_air_pressure", "Pa", [](const Index&) { return 1e5; }, {"time", "lat", "lon"}));
  test::write_nc(path("sfc.nc"), {{"time", 2}, {"lat", 3}, {"lon", 4}}, sfc);
  try {
    InputDataset input({path("pl.nc"), path("sfc.nc")}, no_aliases());
    FAIL() << "expected an InputError";
  } catch (const InputError& e) {
    EXPECT_EQ(e.file(), path("sfc.nc"));
    EXPECT_NE(std::string(e.what()).find("grid"), std::string::npos) << e.what();
  }
}

TEST_F(Reader, AllMissingTemperatureIsAnInputErrorNamingTheVariable) {
  std::vector<Var> vars = grid.standard();
  vars[4].atts.push_back({"_FillValue", "", {-999.0}});
  for (double& v : vars[4].data) v = -999.0;
  test::write_nc(path("in.nc"), grid.dims, vars);
  InputDataset input({path("in.nc")}, no_aliases());
  ColumnBlock block;
  input.read_block(0, {0, 12}, block);
  EXPECT_FALSE(block.any_temp);
  EXPECT_TRUE(block.any_humidity);
  try {
    input.throw_all_missing(0, false, true, true);
  } catch (const InputError& e) {
    EXPECT_EQ(e.variable(), "temp");
  }
}

}  // namespace
}  // namespace latentlift
