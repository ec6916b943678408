// io::detail::check_global_heaps: a damaged global heap collection of a NetCDF-4/HDF5 file is
// refused before HDF5 reads it. Layout from the HDF5 File Format Specification (version 2.0,
// section III.E): "GCOL", version 1, 3 reserved bytes, collection size (8 bytes), then objects
// of index (2), reference count (2), reserved (4), size (8), data padded to 8 bytes.
#include <gtest/gtest.h>
#include <netcdf.h>

#include <algorithm>
#include <chrono>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "io/global_heap.hpp"
#include "io/netcdf_util.hpp"
#include "io/structure_probe.hpp"
#include "latentlift/errors.hpp"
#include "support/test_support.hpp"

using latentlift::InputError;
using latentlift::io::detail::check_global_heaps;

namespace {

/// A scratch folder of this test alone (ctest runs the tests of one suite in parallel).
std::string scratch() {
  return latentlift::test::scratch_dir(std::string("global_heap/") + ::testing::UnitTest::GetInstance()->current_test_info()->name());
}

/// A NetCDF-4 file with coordinate variables: netCDF-C attaches them as HDF5 dimension scales,
/// whose DIMENSION_LIST attribute (variable-length references) lives in a global heap.
std::vector<unsigned char> netcdf4_with_dimension_scales() {
  const std::string path = scratch() + "/clean.nc";
  int nc = -1, lat = -1, lon = -1, lat_var = -1, lon_var = -1, t = -1;
  EXPECT_EQ(nc_create(path.c_str(), NC_CLOBBER | NC_NETCDF4, &nc), NC_NOERR);
  nc_def_dim(nc, "lat", 3, &lat);
  nc_def_dim(nc, "lon", 4, &lon);
  nc_def_var(nc, "lat", NC_FLOAT, 1, &lat, &lat_var);
  nc_def_var(nc, "lon", NC_FLOAT, 1, &lon, &lon_var);
  const int dims[] = {lat, lon};
  nc_def_var(nc, "t", NC_FLOAT, 2, dims, &t);
  EXPECT_EQ(nc_close(nc), NC_NOERR);
  std::ifstream in(path, std::ios::binary);
  return std::vector<unsigned char>(std::istreambuf_iterator<char>(in), {});
}

std::string write_bytes(const std::string& name, const std::vector<unsigned char>& bytes) {
  const std::string path = scratch() + "/" + name;
  std::ofstream(path, std::ios::binary).write(reinterpret_cast<const char*>(bytes.data()), bytes.size());
  return path;
}

std::size_t collection_offset(const std::vector<unsigned char>& bytes) {
  const unsigned char signature[] = {'G', 'C', 'O', 'L', 1, 0, 0, 0};
  return static_cast<std::size_t>(std::search(bytes.begin(), bytes.end(), std::begin(signature), std::end(signature)) -
                                  bytes.begin());
}

/// The file with its first global heap object header zeroed (index 0, size 0: free space that
/// does not advance); empty when there is no heap.
std::vector<unsigned char> with_zeroed_heap_object(std::vector<unsigned char> bytes) {
  const std::size_t heap = collection_offset(bytes);
  if (heap + 32 > bytes.size()) return {};
  std::fill(bytes.begin() + static_cast<std::ptrdiff_t>(heap + 16), bytes.begin() + static_cast<std::ptrdiff_t>(heap + 32), 0);
  return bytes;
}

}  // namespace

TEST(GlobalHeap, NetcdfFileWithDimensionScalesHasAHeapAndPasses) {
  const std::vector<unsigned char> bytes = netcdf4_with_dimension_scales();
  ASSERT_LT(collection_offset(bytes), bytes.size()) << "no global heap: the checks below would prove nothing";
  const std::string path = write_bytes("clean-copy.nc", bytes);
  EXPECT_NO_THROW(check_global_heaps(path));
  EXPECT_NO_THROW(latentlift::io::detail::NcFile::open_read(path));
}

TEST(GlobalHeap, ZeroedObjectHeaderIsRefusedQuicklyNamingTheFile) {
  // A zeroed object header reads as free space of 0 bytes: HDF5 1.10.8 loops on it for ever.
  const std::vector<unsigned char> bytes = with_zeroed_heap_object(netcdf4_with_dimension_scales());
  ASSERT_FALSE(bytes.empty()) << "no global heap to damage";
  const std::string path = write_bytes("zeroed-object.nc", bytes);
  const auto start = std::chrono::steady_clock::now();
  try {
    latentlift::io::detail::NcFile::open_read(path, "forecast.nc");
    FAIL() << "a damaged global heap was opened";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("forecast.nc"), std::string::npos) << error.what();
    EXPECT_NE(std::string(error.what()).find("global heap"), std::string::npos) << error.what();
  }
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(), 5.0);
}

TEST(GlobalHeap, CollectionLargerThanTheFileIsRefused) {
  std::vector<unsigned char> bytes = netcdf4_with_dimension_scales();
  const std::size_t heap = collection_offset(bytes);
  ASSERT_LT(heap, bytes.size());
  bytes[heap + 8 + 6] = 0x7f;  // collection size (little-endian, 8 bytes) far beyond the file
  EXPECT_THROW(check_global_heaps(write_bytes("huge-heap.nc", bytes)), InputError);
}

TEST(GlobalHeap, ClassicAndOtherFilesAreLeftToNetcdf) {
  EXPECT_NO_THROW(check_global_heaps(write_bytes("classic.nc", {'C', 'D', 'F', 1, 0, 0, 0, 0})));
  EXPECT_NO_THROW(check_global_heaps(write_bytes("text.nc", {'G', 'C', 'O', 'L', 1, 0, 0, 0, 0})));
}

TEST(StructureProbe, CleanNetcdf4FilePasses) {
  const std::string path = write_bytes("probe-clean.nc", netcdf4_with_dimension_scales());
  EXPECT_NO_THROW(latentlift::io::detail::probe_netcdf4_structure(path));
}

TEST(StructureProbe, LibraryThatNeverReturnsIsStoppedAndTheFileRefused) {
  // The zeroed heap object makes HDF5 1.10.8 loop for ever (see above): the probe's child is
  // killed after its time limit and the parent goes on with an InputError.
  const std::vector<unsigned char> bytes = with_zeroed_heap_object(netcdf4_with_dimension_scales());
  ASSERT_FALSE(bytes.empty()) << "no global heap to damage";
  const std::string path = write_bytes("probe-loop.nc", bytes);
  const auto start = std::chrono::steady_clock::now();
  try {
    latentlift::io::detail::probe_netcdf4_structure(path, "forecast.nc", 1.0);
    FAIL() << "the probe returned on a file HDF5 loops on";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("did not end within 1 s"), std::string::npos) << error.what();
  }
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(), 10.0);
}
