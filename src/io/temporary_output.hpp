// The one mechanism for writing an output safely (NetCDF of analyze, climatology and
// reproject; PNG and side files of quicklook; any further writer): every file is written
// under a temporary name beside its target and put into place only when all are complete.
#pragma once

#include <string>
#include <vector>

namespace latentlift::io::detail {

/// A staged output: the target file TARGET is written as TARGET.tmp-<pid>, side files
/// (world file, .prj, ...) likewise. Temporary files are removed when this object goes out
/// of scope uncommitted, and when SIGINT, SIGTERM or SIGHUP end the process (the signal is
/// then passed on; a signal ignored at start, e.g. under nohup, stays ignored).
///
/// Usage: check_target() at the start of a run (before any work), construct just before
/// writing, write to path() (and to stage_side_file()'s paths), call commit().
class TemporaryOutput {
 public:
  /// Checks the target like check_target() and reserves TARGET.tmp-<pid>.
  TemporaryOutput(std::string target, bool overwrite,
                  const std::string& replace_hint = "use --overwrite to replace it");
  ~TemporaryOutput();
  TemporaryOutput(const TemporaryOutput&) = delete;
  TemporaryOutput& operator=(const TemporaryOutput&) = delete;

  /// UsageError (exit 2) when target is a directory (or a link to one), or exists - a
  /// dangling symbolic link included - and overwrite is false, or its folder does not exist.
  /// replace_hint ends the "exists" message (how the user may replace the file).
  static void check_target(const std::string& target, bool overwrite,
                           const std::string& replace_hint = "use --overwrite to replace it");

  /// The temporary file to write the target to.
  const std::string& path() const { return files_.front().temporary; }
  const std::string& target() const { return files_.front().target; }
  /// Stage a side file committed together with the target; returns its temporary path.
  const std::string& stage_side_file(const std::string& side_target);

  /// Put every file into place. Without overwrite each file is hard-linked to its target
  /// (link(2) fails if the target appeared meanwhile, e.g. written by a concurrent run:
  /// UsageError, nothing of this output kept); with overwrite it is renamed over it.
  /// Other failures are latentlift::Error. The temporary files are gone afterwards.
  void commit();

 private:
  struct File {
    std::string target, temporary;
    int slot = -1;  // in the signal handler's table
  };
  std::vector<File> files_;
  bool overwrite_ = false;
  bool committed_ = false;
  void add(const std::string& target);
  void remove_temporaries() noexcept;
};

/// A scratch file that is never an output (e.g. the NetCDF file GRIB input is staged into):
/// removed when this object goes out of scope and, like TemporaryOutput's files, when SIGINT,
/// SIGTERM or SIGHUP end the process. Create the file at path() after constructing this.
class ScratchFile {
 public:
  explicit ScratchFile(std::string path);
  ~ScratchFile();
  ScratchFile(const ScratchFile&) = delete;
  ScratchFile& operator=(const ScratchFile&) = delete;

  const std::string& path() const { return path_; }

 private:
  std::string path_;
  int slot_ = -1;  // in the signal handler's table
};

}  // namespace latentlift::io::detail
