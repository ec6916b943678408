// The one mechanism for writing an output safely: into a temporary file beside the target,
// renamed into place only when complete (used by analyze, climatology and reproject).
#pragma once

#include <string>

namespace latentlift::io::detail {

/// The temporary file TARGET.tmp-<pid> an output is written to. It is removed when this
/// object goes out of scope uncommitted, and when SIGINT, SIGTERM or SIGHUP end the process
/// (the signal is then passed on). One staged output at a time per process.
class TemporaryOutput {
 public:
  explicit TemporaryOutput(std::string target);
  ~TemporaryOutput();
  TemporaryOutput(const TemporaryOutput&) = delete;
  TemporaryOutput& operator=(const TemporaryOutput&) = delete;

  const std::string& path() const { return path_; }
  const std::string& target() const { return target_; }
  /// Rename the finished file into place; throws latentlift::Error when that fails.
  void commit();

 private:
  std::string target_, path_;
  bool committed_ = false;
};

}  // namespace latentlift::io::detail
