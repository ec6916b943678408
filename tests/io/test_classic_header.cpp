// io::detail::check_classic_header: damaged counts in a classic NetCDF header are refused before
// netCDF-C reads them. Layouts from the NetCDF Classic and 64-bit Offset Format specification
// (Unidata): magic "CDF\x01", numrecs, then dim_list, gatt_list, var_list, each ABSENT = 0 0
// or tag + nelems + entries, big-endian 4-byte integers.
#include <gtest/gtest.h>
#include <netcdf.h>

#include <chrono>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "io/classic_header.hpp"
#include "io/netcdf_util.hpp"
#include "latentlift/errors.hpp"
#include "support/test_support.hpp"

using latentlift::InputError;
using latentlift::io::detail::check_classic_header;

namespace {

/// A scratch folder of this test alone (ctest runs the tests of one suite in parallel).
std::string scratch() {
  return latentlift::test::scratch_dir(std::string("classic_header/") + ::testing::UnitTest::GetInstance()->current_test_info()->name());
}

void put32(std::vector<unsigned char>& b, std::uint32_t v) {
  for (int shift = 24; shift >= 0; shift -= 8) b.push_back(static_cast<unsigned char>(v >> shift));
}

std::string write_bytes(const std::string& name, const std::vector<unsigned char>& bytes) {
  const std::string path = scratch() + "/" + name;
  std::ofstream(path, std::ios::binary).write(reinterpret_cast<const char*>(bytes.data()), bytes.size());
  return path;
}

/// magic, numrecs 0, no dimensions, one global attribute "a" of type char with n values, no variables.
std::vector<unsigned char> header_with_attribute(std::uint32_t n_values, std::uint32_t n_attributes = 1) {
  std::vector<unsigned char> b = {'C', 'D', 'F', 1};
  put32(b, 0);                 // numrecs
  put32(b, 0), put32(b, 0);    // dim_list ABSENT
  put32(b, 0x0C), put32(b, n_attributes);  // NC_ATTRIBUTE nelems
  put32(b, 1), b.insert(b.end(), {'a', 0, 0, 0});  // name "a", padded
  put32(b, 2), put32(b, n_values);         // NC_CHAR nelems
  b.insert(b.end(), {'x', 0, 0, 0});
  put32(b, 0), put32(b, 0);    // var_list ABSENT
  return b;
}

/// A classic file of `format` (NC_CLASSIC_MODEL, NC_64BIT_OFFSET, NC_64BIT_DATA) with a
/// non-record variable z(lat, lon) of doubles and a record variable t(time, lat, lon) of floats
/// over 2 records: the layouts of the specification's three variants.
std::string write_classic(const std::string& name, int format) {
  const std::string path = scratch() + "/" + name;
  int nc = -1, time = -1, lat = -1, lon = -1, z = -1, t = -1;
  EXPECT_EQ(nc_create(path.c_str(), NC_CLOBBER | format, &nc), NC_NOERR);
  nc_def_dim(nc, "time", NC_UNLIMITED, &time);
  nc_def_dim(nc, "lat", 3, &lat);
  nc_def_dim(nc, "lon", 4, &lon);
  const int z_dims[] = {lat, lon}, t_dims[] = {time, lat, lon};
  nc_def_var(nc, "z", NC_DOUBLE, 2, z_dims, &z);
  nc_def_var(nc, "t", NC_FLOAT, 3, t_dims, &t);
  nc_put_att_text(nc, t, "units", 1, "K");
  nc_enddef(nc);
  const std::vector<double> zs(12, 5.0);
  const std::vector<float> ts(24, 280.0f);
  nc_put_var_double(nc, z, zs.data());
  const size_t start[] = {0, 0, 0}, count[] = {2, 3, 4};
  nc_put_vara_float(nc, t, start, count, ts.data());
  EXPECT_EQ(nc_close(nc), NC_NOERR);
  return path;
}

std::vector<unsigned char> read_bytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::vector<unsigned char>(std::istreambuf_iterator<char>(in), {});
}

}  // namespace

TEST(ClassicHeader, WellFormedHeaderPassesAndNetcdfOpensIt) {
  const std::string path = write_bytes("good.nc", header_with_attribute(1));
  EXPECT_NO_THROW(check_classic_header(path));
  EXPECT_NO_THROW(latentlift::io::detail::NcFile::open_read(path));
}

TEST(ClassicHeader, AttributeLongerThanTheFileIsRefused) {
  const std::string path = write_bytes("long_attribute.nc", header_with_attribute(0x7FFFFFF0u));
  EXPECT_THROW(check_classic_header(path), InputError);
}

TEST(ClassicHeader, AbsurdAttributeCountIsRefusedQuickly) {
  const std::string path = write_bytes("many_attributes.nc", header_with_attribute(1, 0x40000000u));
  const auto start = std::chrono::steady_clock::now();
  EXPECT_THROW(latentlift::io::detail::NcFile::open_read(path), InputError);
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(), 5.0);
}

TEST(ClassicHeader, HeaderCutShortIsRefused) {
  std::vector<unsigned char> bytes = header_with_attribute(1);
  bytes.resize(bytes.size() - 6);
  EXPECT_THROW(check_classic_header(write_bytes("short.nc", bytes)), InputError);
}

TEST(ClassicHeader, CompleteFilesOfEachClassicVariantPass) {
  for (int format : {0, NC_64BIT_OFFSET, NC_64BIT_DATA}) {
    const std::string path = write_classic("complete-" + std::to_string(format) + ".nc", format);
    EXPECT_NO_THROW(check_classic_header(path)) << "format flag " << format;
  }
}

TEST(ClassicHeader, EveryTruncationOfAClassicFileIsRefused) {
  // Cut inside the header, inside the non-record data or inside any record: each is an
  // InputError (the last variable is a float record variable, so no padding ends the file).
  for (int format : {0, NC_64BIT_OFFSET, NC_64BIT_DATA}) {
    const std::vector<unsigned char> whole = read_bytes(write_classic("whole-" + std::to_string(format) + ".nc", format));
    for (std::size_t length = 4; length < whole.size(); ++length) {
      const std::vector<unsigned char> cut(whole.begin(), whole.begin() + static_cast<std::ptrdiff_t>(length));
      EXPECT_THROW(check_classic_header(write_bytes("cut.nc", cut)), InputError)
          << "format flag " << format << ", " << length << " of " << whole.size() << " bytes";
    }
  }
}

TEST(ClassicHeader, TruncatedClassicFileIsAnInputErrorNamingTheShownName) {
  std::vector<unsigned char> bytes = read_bytes(write_classic("named.nc", 0));
  bytes.resize(bytes.size() - 40);
  const std::string path = write_bytes("named-cut.nc", bytes);
  try {
    latentlift::io::detail::NcFile::open_read(path, "forecast.grib2");
    FAIL() << "a truncated classic file was opened";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("forecast.grib2"), std::string::npos) << error.what();
    EXPECT_NE(std::string(error.what()).find("truncated"), std::string::npos) << error.what();
  }
}

TEST(ClassicHeader, OtherFilesAreLeftToNetcdf) {
  EXPECT_NO_THROW(check_classic_header(write_bytes("text.nc", {'h', 'e', 'l', 'l', 'o'})));
}
