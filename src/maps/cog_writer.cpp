// A COG is built in GDAL's MEM driver (bands, geotransform, CRS, no-data, metadata) and copied by
// the COG driver, which writes the tiled layout with internal overviews.
#include "maps/cog_writer.hpp"

#include <cpl_conv.h>
#include <cpl_error.h>
#include <cpl_string.h>
#include <cpl_vsi.h>
#include <gdal.h>
#include <ogr_srs_api.h>

#include <atomic>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <memory>
#include <mutex>

#include "io/netcdf_util.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

namespace {

struct DatasetCloser {
  void operator()(void* dataset) const { GDALClose(static_cast<GDALDatasetH>(dataset)); }
};
using Dataset = std::unique_ptr<void, DatasetCloser>;

struct SrsDeleter {
  void operator()(void* srs) const { OSRDestroySpatialReference(static_cast<OGRSpatialReferenceH>(srs)); }
};

struct StringList {
  char** list = nullptr;
  ~StringList() { CSLDestroy(list); }
  void set(const char* key, const std::string& value) { list = CSLSetNameValue(list, key, value.c_str()); }
};

// GDAL messages go to the exception, not to stderr.
struct QuietErrors {
  QuietErrors() {
    CPLPushErrorHandler(CPLQuietErrorHandler);
    CPLErrorReset();
  }
  ~QuietErrors() { CPLPopErrorHandler(); }
};

std::string gdal_message() {
  const char* text = CPLGetLastErrorMsg();
  return text && *text ? text : "unknown GDAL error";
}

// GDAL's COG driver writes its overviews (and masks) to temporary files beside the output
// (NAME.ovr.tmp) unless CPL_TMPDIR names another folder: /vsimem keeps them in memory.
struct TemporaryFilesInMemory {
  std::string previous;
  bool had_previous = false;
  TemporaryFilesInMemory() {
    if (const char* value = CPLGetThreadLocalConfigOption("CPL_TMPDIR", nullptr)) previous = value, had_previous = true;
    CPLSetThreadLocalConfigOption("CPL_TMPDIR", "/vsimem");
  }
  ~TemporaryFilesInMemory() { CPLSetThreadLocalConfigOption("CPL_TMPDIR", had_previous ? previous.c_str() : nullptr); }
};

/// A file in GDAL's in-memory file system, removed on destruction.
struct MemoryFile {
  std::string path;
  ~MemoryFile() { VSIUnlink(path.c_str()); }
};

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};

/// Writes n bytes to path; Error naming `name` with the storage's reason (errno) on failure.
void write_file(const std::string& path, const unsigned char* bytes, std::size_t n, const std::string& name) {
  auto fail = [&](int error) {
    errno = error;
    const std::string storage = io::detail::storage_reason(path);
    throw Error(name + ": writing the COG: " + (storage.empty() ? std::strerror(error) : storage));
  };
  std::unique_ptr<std::FILE, FileCloser> file(std::fopen(path.c_str(), "wb"));
  if (!file) fail(errno);
  if (std::fwrite(bytes, 1, n, file.get()) != n) fail(errno);
  // A full disk often shows only when the buffered rest is written: check the flush and the close.
  if (std::fflush(file.get()) != 0) fail(errno);
  if (std::fclose(file.release()) != 0) fail(errno);
}

}  // namespace

void write_cog(const std::string& path, const CogLayer& layer, const std::string& reported_as) {
  const std::string& name = reported_as.empty() ? path : reported_as;
  static std::once_flag registered;
  std::call_once(registered, [] { GDALAllRegister(); });
  QuietErrors quiet;
  GDALDriverH mem = GDALGetDriverByName("MEM"), cog = GDALGetDriverByName("COG");
  if (!mem || !cog) throw Error("GDAL: the MEM and COG drivers are needed (GDAL 3.1 or newer)");
  const int count = static_cast<int>(layer.bands.size());
  GDALDataType type = layer.classes ? GDT_Byte : GDT_Float32;
  Dataset memory(GDALCreate(mem, "", layer.nx, layer.ny, count, type, nullptr));
  if (!memory) throw Error("GDAL: cannot create an in-memory raster: " + gdal_message());
  auto* ds = static_cast<GDALDatasetH>(memory.get());
  double transform[6] = {layer.west, layer.resolution, 0.0, layer.north, 0.0, -layer.resolution};
  if (GDALSetGeoTransform(ds, transform) != CE_None) throw Error("GDAL: geotransform: " + gdal_message());
  std::unique_ptr<void, SrsDeleter> srs(OSRNewSpatialReference(nullptr));
  auto* sr = static_cast<OGRSpatialReferenceH>(srs.get());
  if (OSRSetFromUserInput(sr, layer.crs_wkt.c_str()) != OGRERR_NONE)
    throw Error("GDAL cannot read the map CRS: " + gdal_message());
  OSRSetAxisMappingStrategy(sr, OAMS_TRADITIONAL_GIS_ORDER);
  if (GDALSetSpatialRef(ds, sr) != CE_None) throw Error("GDAL: CRS: " + gdal_message());

  StringList metadata;
  metadata.set("field", layer.field);
  metadata.set("units", layer.units);
  metadata.set("long_name", layer.long_name);
  if (!layer.flag_values.empty()) metadata.set("flag_values", layer.flag_values);
  if (!layer.flag_meanings.empty()) metadata.set("flag_meanings", layer.flag_meanings);
  metadata.set("source", layer.source);
  GDALSetMetadata(ds, metadata.list, nullptr);

  const double nodata = layer.classes ? 255.0 : layer.nodata;
  std::vector<float> floats;
  std::vector<unsigned char> bytes;
  for (int b = 0; b < count; ++b) {
    const auto& values = layer.bands[b];
    if (values.size() != static_cast<std::size_t>(layer.nx) * static_cast<std::size_t>(layer.ny))
      throw Error("write_cog: band of the wrong size");
    GDALRasterBandH band = GDALGetRasterBand(ds, b + 1);
    GDALSetRasterNoDataValue(band, nodata);
    CPLErr status;
    if (layer.classes) {
      bytes.resize(values.size());
      for (std::size_t k = 0; k < values.size(); ++k)
        bytes[k] = std::isnan(values[k]) || values[k] < 0 || values[k] > 254 ? 255 : static_cast<unsigned char>(std::lround(values[k]));
      status = GDALRasterIO(band, GF_Write, 0, 0, layer.nx, layer.ny, bytes.data(), layer.nx, layer.ny, GDT_Byte, 0, 0);
    } else {
      floats.resize(values.size());
      for (std::size_t k = 0; k < values.size(); ++k)
        floats[k] = std::isnan(values[k]) ? static_cast<float>(nodata) : static_cast<float>(values[k]);
      status = GDALRasterIO(band, GF_Write, 0, 0, layer.nx, layer.ny, floats.data(), layer.nx, layer.ny, GDT_Float32, 0, 0);
    }
    if (status != CE_None) throw Error("GDAL: writing band " + std::to_string(b + 1) + ": " + gdal_message());
    std::string time = b < static_cast<int>(layer.band_times.size()) ? layer.band_times[b] : "";
    GDALSetDescription(band, (layer.field + (time.empty() ? "" : " " + time)).c_str());
    StringList band_metadata;
    if (!time.empty()) band_metadata.set("valid_time", time);
    band_metadata.set("units", layer.units);
    band_metadata.set("long_name", layer.long_name);
    GDALSetMetadata(band, band_metadata.list, nullptr);
    if (!layer.units.empty() && layer.units != "1") GDALSetRasterUnitType(band, layer.units.c_str());
  }

  StringList options;
  options.set("COMPRESS", "DEFLATE");
  options.set("OVERVIEWS", "AUTO");
  options.set("OVERVIEW_RESAMPLING", layer.classes ? "NEAREST" : "AVERAGE");
  options.set("BLOCKSIZE", "256");
  // The COG is made in memory (GDAL's messages on a full disk do not say so, and its temporary
  // overview files would be left behind by a signal), then written out by us with every write
  // checked.
  static std::atomic<unsigned> counter{0};
  MemoryFile in_memory{"/vsimem/latentlift-cog-" + std::to_string(counter++) + ".tif"};
  {
    TemporaryFilesInMemory overviews_in_memory;
    CPLErrorReset();
    Dataset written(GDALCreateCopy(cog, in_memory.path.c_str(), ds, FALSE, options.list, nullptr, nullptr));
    if (!written) throw Error(name + ": GDAL COG driver: " + gdal_message());
  }
  vsi_l_offset length = 0;
  const GByte* cog_bytes = VSIGetMemFileBuffer(in_memory.path.c_str(), &length, FALSE);
  if (!cog_bytes || CPLGetLastErrorType() >= CE_Failure) throw Error(name + ": GDAL COG driver: " + gdal_message());
  write_file(path, cog_bytes, static_cast<std::size_t>(length), name);
}

}  // namespace latentlift::maps::detail
