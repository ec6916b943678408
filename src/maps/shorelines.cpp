// GSHHG shorelines through GMT's C API: the "coast" module dumps the binned GSHHG polylines (-M)
// of a region into a virtual file, which is read back as a GMT dataset.
#include "maps/shorelines.hpp"

#include <gmt/gmt.h>

#include <cstdio>
#include <filesystem>
#include <memory>
#include <mutex>

#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

namespace {

constexpr const char* kGshhgDir = "/usr/share/gmt-gshhg/";  // Debian gmt-gshhg-low / gmt-gshhg-high

std::mutex gmt_mutex;
std::string* gmt_messages = nullptr;  // the running call's messages (under gmt_mutex)

int collect_message(FILE*, const char* message) {
  if (gmt_messages && message) *gmt_messages += message;
  return 0;
}

struct SessionDeleter {
  void operator()(void* api) const { GMT_Destroy_Session(api); }
};
using Session = std::unique_ptr<void, SessionDeleter>;

// One virtual output file of a session, closed on scope exit.
class VirtualFile {
 public:
  explicit VirtualFile(void* api) : api_(api) {
    if (GMT_Open_VirtualFile(api, GMT_IS_DATASET, GMT_IS_LINE, GMT_OUT | GMT_IS_REFERENCE, nullptr, name_) != GMT_NOERROR)
      throw Error("GMT: cannot open a virtual file for the shorelines");
  }
  ~VirtualFile() { GMT_Close_VirtualFile(api_, name_); }
  const char* name() const { return name_; }

 private:
  void* api_;
  char name_[GMT_VF_LEN] = {0};
};

std::vector<LonLatLine> dump(void* api, const std::string& region, const std::string& what, std::string& messages) {
  VirtualFile file(api);
  std::string args = region + " " + what + " -M ->" + file.name();
  if (GMT_Call_Module(api, "coast", GMT_MODULE_CMD, const_cast<char*>(args.c_str())) != GMT_NOERROR)
    throw Error("GMT coast " + args + " failed: " + messages);
  auto* data = static_cast<GMT_DATASET*>(GMT_Read_VirtualFile(api, file.name()));
  std::vector<LonLatLine> lines;
  if (!data) return lines;  // nothing in the region
  for (uint64_t t = 0; t < data->n_tables; ++t)
    for (uint64_t s = 0; s < data->table[t]->n_segments; ++s) {
      const GMT_DATASEGMENT* segment = data->table[t]->segment[s];
      if (segment->n_columns < 2 || segment->n_rows < 2) continue;
      LonLatLine line(segment->n_rows);
      for (uint64_t r = 0; r < segment->n_rows; ++r) line[r] = {segment->data[0][r], segment->data[1][r]};
      lines.push_back(std::move(line));
    }
  return lines;
}

}  // namespace

std::string Shorelines::description() const {
  const char* name = resolution == 'c' ? "crude" : resolution == 'l' ? "low" : resolution == 'i' ? "intermediate" : "high";
  return std::string("GSHHG 2.3.7 ") + name + " resolution";
}

char shoreline_resolution(double km_per_pixel) {
  if (km_per_pixel >= 100.0) return 'c';
  if (km_per_pixel >= 20.0) return 'l';
  if (km_per_pixel >= 4.0) return 'i';
  return 'h';
}

Shorelines read_shorelines(double west, double east, double south, double north, char resolution, double min_area_km2) {
  std::string data_file = std::string(kGshhgDir) + "binned_GSHHS_" + resolution + ".nc";
  if (!std::filesystem::exists(data_file))
    throw Error(data_file + ": GSHHG shorelines missing (Debian package " +
                (resolution == 'h' ? "gmt-gshhg-high" : "gmt-gshhg-low") + "; scripts/setup.sh installs it)");
  std::lock_guard<std::mutex> lock(gmt_mutex);
  std::string messages;
  gmt_messages = &messages;
  struct Reset {
    ~Reset() { gmt_messages = nullptr; }
  } reset;
  Session api(GMT_Create_Session("latentlift", 2U,
                                 GMT_SESSION_NOEXIT | GMT_SESSION_EXTERNAL | GMT_SESSION_NOHISTORY | GMT_SESSION_NOGDALCLOSE,
                                 collect_message));
  if (!api) throw Error("GMT: cannot start a session (Debian packages libgmt6 and gmt-common): " + messages);
  char region[160];
  std::snprintf(region, sizeof region, "-R%.6f/%.6f/%.6f/%.6f -D%c -A%.0f -Vq", west, east, south, north, resolution,
                std::max(0.0, min_area_km2));
  Shorelines out;
  out.resolution = resolution;
  out.coast = dump(api.get(), region, "-W", messages);
  out.borders = dump(api.get(), region, "-N1", messages);
  return out;
}

}  // namespace latentlift::maps::detail
