// A COG is built in GDAL's MEM driver (bands, geotransform, CRS, no-data, metadata) and copied by
// the COG driver, which writes the tiled layout with internal overviews.
#include "maps/cog_writer.hpp"

#include <cpl_conv.h>
#include <cpl_error.h>
#include <cpl_string.h>
#include <gdal.h>
#include <ogr_srs_api.h>

#include <cmath>
#include <memory>
#include <mutex>

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

}  // namespace

void write_cog(const std::string& path, const CogLayer& layer) {
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
  Dataset written(GDALCreateCopy(cog, path.c_str(), ds, FALSE, options.list, nullptr, nullptr));
  if (!written) throw Error(path + ": GDAL COG driver: " + gdal_message());
}

}  // namespace latentlift::maps::detail
