// Direct chunk reading of NetCDF-4 inputs (src/io/chunk_reader): the values decoded from raw
// deflated (and shuffled) chunks equal what netCDF-C itself reads from the same file and from
// an uncompressed copy, for partial edge chunks, float64 and several time steps; layouts the
// path does not know stay with netCDF-C; a damaged chunk is an InputError naming the variable.
#include <gtest/gtest.h>
#include <hdf5.h>

#include <cmath>
#include <cstdio>
#include <fstream>
#include <vector>

#include "io/chunk_reader.hpp"
#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

using test::Index;
using test::SmallGrid;
using test::Var;

/// A grid whose sizes are not multiples of the chunk sizes (edge chunks are partial).
class ChunkReading : public ::testing::Test {
 protected:
  void SetUp() override {
    grid.dims = {{"time", 3}, {"level", 4}, {"lat", 5}, {"lon", 7}};
    std::vector<Var> vars = grid.coordinates();
    vars[0].data = {0, 6, 12};
    vars[2].data = {10, 11, 12, 13, 14};
    vars[3].data = {20, 21, 22, 23, 24, 25, 26};
    // Values with many significant bits, so any misplaced byte shows.
    auto temp = [](const Index& i) {
      return 290.123456 - 9.87 * i.at("level") + 0.731 * i.at("lat") + 0.0917 * i.at("lon") + 0.55 * i.at("time");
    };
    auto q = [](const Index& i) { return 0.0123457 - 0.00271 * i.at("level") + 0.000113 * i.at("lon") * i.at("lat"); };
    auto z = [](const Index& i) { return 111.1 + 1402.7 * i.at("level") + 3.3 * i.at("lat") + 1.01 * i.at("lon"); };
    vars.push_back(grid.var("temp", "air_temperature", "K", temp));
    vars.push_back(grid.var("hum", "specific_humidity", "kg kg-1", q));
    vars.push_back(grid.var("height", "geopotential_height", "m", z));
    plain_vars = vars;
  }
  /// The grid's T, q, z written chunked with the given filters (chunks: time, level, lat, lon).
  std::string write(const std::string& name, std::vector<std::size_t> chunks, int deflate, bool shuffle,
                    nc_type type = NC_FLOAT, bool fletcher32 = false) {
    std::vector<Var> vars = plain_vars;
    for (std::size_t v = 4; v < 7; ++v) {
      vars[v].type = type;
      vars[v].chunks = chunks;
      vars[v].deflate_level = deflate;
      vars[v].shuffle = shuffle;
      vars[v].fletcher32 = fletcher32;
    }
    test::write_nc(path(name), grid.dims, vars);
    return path(name);
  }
  /// Every step of a and b read block by block (b through netCDF-C only) must be equal.
  void expect_same_blocks(const InputDataset& a, const InputDataset& b, std::size_t block_columns) {
    ColumnBlock x, y;
    for (std::size_t step = 0; step < a.grid().n_steps; ++step) {
      a.decode_step(step);
      for (const ColumnRange& range : column_blocks(a.grid(), block_columns)) {
        a.read_block(step, range, x);
        b.read_block(step, range, y);
        EXPECT_EQ(x.temp_k, y.temp_k) << "step " << step << " block at " << range.begin;
        EXPECT_EQ(x.humidity, y.humidity) << "step " << step << " block at " << range.begin;
        EXPECT_EQ(x.height_m, y.height_m) << "step " << step << " block at " << range.begin;
      }
      a.release_step(step);
    }
  }
  std::string path(const std::string& name) const { return dir + "/" + name; }
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  SmallGrid grid;
  std::vector<Var> plain_vars;
};

// Reference: netCDF-C (Debian libnetcdf) reading the uncompressed copy of the same values.
TEST_F(ChunkReading, DeflatedShuffledChunksDecodeToWhatNetcdfReadsUncompressed) {
  InputDataset direct({write("deflated.nc", {1, 3, 2, 3}, 4, true)}, {});
  test::write_nc(path("plain.nc"), grid.dims, plain_vars);
  InputDataset plain({path("plain.nc")}, {});
  EXPECT_EQ(direct.directly_read_variables(), 3u);
  EXPECT_EQ(plain.directly_read_variables(), 0u);
  expect_same_blocks(direct, plain, 35);
  expect_same_blocks(direct, plain, 7);
}

// Reference: netCDF-C reading the same file (its own inflate), blocks of part of a row.
TEST_F(ChunkReading, DeflatedChunksWithoutShuffleDecodeToWhatNetcdfReads) {
  const std::string file = write("deflated.nc", {2, 4, 5, 7}, 1, false);
  InputDataset direct({file}, {});
  InputDataset reference({write("plain_chunked.nc", {2, 4, 5, 7}, 0, false)}, {});
  EXPECT_EQ(direct.directly_read_variables(), 3u);
  expect_same_blocks(direct, reference, 3);
}

TEST_F(ChunkReading, Float64VariablesDecodeToWhatNetcdfReads) {
  InputDataset direct({write("deflated64.nc", {1, 1, 5, 7}, 2, true, NC_DOUBLE)}, {});
  InputDataset reference({write("plain64.nc", {1, 1, 5, 7}, 0, false, NC_DOUBLE)}, {});
  EXPECT_EQ(direct.directly_read_variables(), 3u);
  expect_same_blocks(direct, reference, 35);
}

TEST_F(ChunkReading, StepsNotDecodedAheadAreReadByNetcdf) {
  InputDataset direct({write("deflated.nc", {1, 1, 5, 7}, 1, true)}, {});
  test::write_nc(path("plain.nc"), grid.dims, plain_vars);
  InputDataset plain({path("plain.nc")}, {});
  ColumnBlock x, y;
  direct.read_block(2, {0, 35}, x);  // no decode_step: netCDF-C reads it
  plain.read_block(2, {0, 35}, y);
  EXPECT_EQ(x.temp_k, y.temp_k);
}

// Reference: netCDF-C gives the _FillValue for data never written (netCDF User Guide,
// "Fill Values"); the reader turns it into NaN.
TEST_F(ChunkReading, ChunksNeverWrittenReadAsMissingLikeNetcdf) {
  std::vector<Var> vars = plain_vars;
  vars[5].data.clear();  // humidity defined, never written
  vars[5].atts.push_back({"_FillValue", "", {-999.0}});
  for (std::size_t v = 4; v < 7; ++v) {
    vars[v].chunks = {1, 1, 5, 7};
    vars[v].deflate_level = 1;
  }
  test::write_nc(path("unwritten.nc"), grid.dims, vars);
  InputDataset input({path("unwritten.nc")}, {});
  ASSERT_EQ(input.directly_read_variables(), 3u);
  input.decode_step(1);
  ColumnBlock block;
  input.read_block(1, {0, 35}, block);
  EXPECT_FALSE(block.any_humidity);
  for (double value : block.humidity) EXPECT_TRUE(std::isnan(value));
  EXPECT_TRUE(block.any_temp);
}

TEST_F(ChunkReading, OtherFiltersAndUncompressedInputStayWithNetcdf) {
  InputDataset checksummed({write("fletcher.nc", {1, 1, 5, 7}, 1, true, NC_FLOAT, true)}, {});
  InputDataset uncompressed({write("chunked.nc", {1, 1, 5, 7}, 0, false)}, {});
  test::write_nc(path("classic.nc"), grid.dims, plain_vars, NC_CLOBBER);
  InputDataset classic({path("classic.nc")}, {});
  EXPECT_EQ(checksummed.directly_read_variables(), 0u);
  EXPECT_EQ(uncompressed.directly_read_variables(), 0u);
  EXPECT_EQ(classic.directly_read_variables(), 0u);
  expect_same_blocks(checksummed, classic, 35);  // decode_step is a no-op: netCDF-C reads
}

TEST_F(ChunkReading, ReaderSaysWhyItLeavesAVariableToNetcdf) {
  const std::string file = write("fletcher.nc", {1, 1, 5, 7}, 1, true, NC_FLOAT, true);
  io::detail::ChunkReader reader(file, "temp", {3, 4, 5, 7}, {true, false, false, false}, true);
  EXPECT_FALSE(reader.supports());
  EXPECT_NE(reader.reason().find("filter"), std::string::npos) << reader.reason();
}

TEST_F(ChunkReading, ADamagedChunkIsAnInputErrorNamingFileAndVariable) {
  const std::string file = write("deflated.nc", {1, 1, 5, 7}, 1, false);
  // Find the first chunk of 'hum' with HDF5 and overwrite the middle of its compressed bytes.
  haddr_t address = 0;
  hsize_t size = 0;
  {
    hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    hid_t d = H5Dopen2(f, "hum", H5P_DEFAULT);
    hsize_t offset[4] = {0, 0, 0, 0};
    unsigned mask = 0;
    ASSERT_GE(H5Dget_chunk_info_by_coord(d, offset, &mask, &address, &size), 0);
    H5Dclose(d);
    H5Fclose(f);
  }
  ASSERT_GT(size, 8u);
  {
    std::fstream out(file, std::ios::in | std::ios::out | std::ios::binary);
    out.seekp(static_cast<std::streamoff>(address + size / 2));
    const std::string junk(static_cast<std::size_t>(size / 2), '\xff');
    out.write(junk.data(), static_cast<std::streamsize>(junk.size()));
  }
  try {
    InputDataset input({file}, {});  // the plausibility sample read while opening may meet the chunk first
    input.decode_step(0);
    FAIL() << "a damaged chunk was decoded";
  } catch (const InputError& e) {
    EXPECT_EQ(e.file(), file);
    EXPECT_EQ(e.variable(), "hum");
  }
}

}  // namespace
}  // namespace latentlift
