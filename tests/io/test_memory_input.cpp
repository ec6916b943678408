// A dataset held in memory (MemoryDataset, as the Python module hands over Dask blocks) is read
// by the rules of a file: the same quantities, grid, SI values, packing, fill values and errors
// as the same variables written to a NetCDF file and opened by path.
#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <variant>

#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Att;
using test::SmallGrid;
using test::Var;

StoredType stored_type(nc_type type) {
  switch (type) {
    case NC_SHORT: return StoredType::int16;
    case NC_INT: return StoredType::int32;
    case NC_FLOAT: return StoredType::float32;
    default: return StoredType::float64;
  }
}

/// The variables of a test file as a MemoryDataset; `storage` keeps the values (as the file
/// stores them: float values and float attributes rounded to float).
MemoryDataset memory_of(const std::string& name, const test::Dims& dims, const std::vector<Var>& vars,
                        std::vector<std::vector<double>>& storage) {
  MemoryDataset m;
  m.name = name;
  storage.reserve(vars.size());
  for (const Var& v : vars) {
    MemoryVariable var;
    var.name = v.name;
    var.dims = v.dims;
    for (const std::string& d : v.dims)
      for (const auto& [n, length] : dims)
        if (n == d) var.shape.push_back(length);
    var.type = stored_type(v.type);
    for (const Att& a : v.atts) {
      if (a.numbers.empty())
        var.attributes.push_back({a.name, a.text});
      else
        var.attributes.push_back({a.name, a.numbers});
      if (!a.numbers.empty() && (a.type == NC_NAT ? v.type : a.type) == NC_FLOAT)  // as the file holds them
        for (double& x : std::get<std::vector<double>>(var.attributes.back().value)) x = static_cast<float>(x);
    }
    std::vector<double> values = v.data;
    if (v.type == NC_FLOAT)
      for (double& x : values) x = static_cast<double>(static_cast<float>(x));
    storage.push_back(values);
    var.values = storage.back().data();
    m.variables.push_back(var);
  }
  return m;
}

void expect_same_values(const std::vector<double>& a, const std::vector<double>& b, const char* what) {
  ASSERT_EQ(a.size(), b.size()) << what;
  for (std::size_t i = 0; i < a.size(); ++i) {
    if (std::isnan(b[i]))
      EXPECT_TRUE(std::isnan(a[i])) << what << " at " << i;
    else
      EXPECT_EQ(a[i], b[i]) << what << " at " << i;
  }
}

void expect_same_blocks(const InputDataset& memory, const InputDataset& file) {
  const GridDescription& g = file.grid();
  EXPECT_EQ(memory.grid().n_columns, g.n_columns);
  EXPECT_EQ(memory.grid().n_steps, g.n_steps);
  EXPECT_EQ(memory.grid().pressure_pa, g.pressure_pa);
  EXPECT_EQ(memory.grid().time_values, g.time_values);
  EXPECT_EQ(memory.humidity_kind(), file.humidity_kind());
  for (std::size_t step = 0; step < g.n_steps; ++step) {
    ColumnBlock a, b;
    memory.read_block(step, {0, g.n_columns}, a);
    file.read_block(step, {0, g.n_columns}, b);
    expect_same_values(a.temp_k, b.temp_k, "temperature");
    expect_same_values(a.humidity, b.humidity, "humidity");
    expect_same_values(a.height_m, b.height_m, "height");
    expect_same_values(a.surface_pressure_pa, b.surface_pressure_pa, "surface pressure");
  }
}

class MemoryInput : public ::testing::Test {
 protected:
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string path = dir + "/in.nc";
  SmallGrid grid;
  std::vector<std::vector<double>> storage;
};

TEST_F(MemoryInput, ReadsTheSameQuantitiesGridAndValuesAsTheSameVariablesInAFile) {
  const std::vector<Var> vars = grid.standard();
  test::write_nc(path, grid.dims, vars);
  const MemoryDataset m = memory_of("<block>", grid.dims, vars, storage);
  auto memory = InputDataset::from_memory(m, {});
  InputDataset file({path}, {});
  ASSERT_EQ(memory->sources().size(), 3u);
  EXPECT_EQ(memory->sources()[0].variable, "temp");
  EXPECT_EQ(memory->sources()[0].file, "<block>");
  expect_same_blocks(*memory, file);
}

TEST_F(MemoryInput, PackedValuesFillValuesAndUnitsAreConvertedLikeAFile) {
  // Temperature packed in shorts (0.01 K steps, CF 1.8 sec. 8.1) with a fill value at two
  // places; humidity in g/kg and heights as geopotential (m2 s-2), converted with UDUNITS-2.
  std::vector<Var> vars = grid.coordinates();
  Var temp = grid.var("temp", "air_temperature", "K", [](const test::Index& i) {
    if (i.at("lat") == 1 && i.at("lon") == 2 && i.at("level") < 2) return -32767.0;
    return std::round((SmallGrid::temp_k(i) - 273.15) / 0.01);
  });
  temp.type = NC_SHORT;
  temp.atts.push_back({"scale_factor", "", {0.01}, NC_FLOAT});
  temp.atts.push_back({"add_offset", "", {273.15}, NC_FLOAT});
  temp.atts.push_back({"_FillValue", "", {-32767}});
  vars.push_back(temp);
  vars.push_back(grid.var("hum", "specific_humidity", "g/kg", [](const test::Index& i) { return 1000 * SmallGrid::q(i); }));
  vars.push_back(grid.var("phi", "geopotential", "m2 s-2", [](const test::Index& i) { return 9.80665 * SmallGrid::z_m(i); }));
  test::write_nc(path, grid.dims, vars);
  const MemoryDataset m = memory_of("<block>", grid.dims, vars, storage);
  auto memory = InputDataset::from_memory(m, {});
  InputDataset file({path}, {});
  expect_same_blocks(*memory, file);
  ColumnBlock block;
  memory->read_block(0, {6, 1}, block);  // lat 1, lon 2: the two filled levels are missing
  EXPECT_TRUE(std::isnan(block.temp_k[0]));
  EXPECT_TRUE(std::isnan(block.temp_k[1]));
  EXPECT_FALSE(std::isnan(block.temp_k[2]));
}

TEST_F(MemoryInput, ErrorsNameTheDatasetWithTheMessagesOfAFile) {
  std::vector<Var> vars = grid.standard();
  vars[4].atts = {{"standard_name", "air_temperature"}};  // temperature without units
  ASSERT_EQ(vars[4].name, "temp");
  test::write_nc(path, grid.dims, vars);
  const MemoryDataset m = memory_of("<xarray.Dataset>", grid.dims, vars, storage);
  std::string from_file, from_memory;
  try {
    InputDataset file({path}, {});
  } catch (const InputError& e) {
    from_file = e.what();
  }
  try {
    InputDataset::from_memory(m, {});
  } catch (const InputError& e) {
    from_memory = e.what();
  }
  ASSERT_FALSE(from_file.empty());
  ASSERT_NE(from_file.find(path), std::string::npos);
  EXPECT_EQ(from_memory, from_file.replace(from_file.find(path), path.size(), "<xarray.Dataset>"));
}

}  // namespace
}  // namespace latentlift
