#include "io/temporary_output.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <csignal>
#include <cstring>
#include <filesystem>
#include <mutex>
#include <system_error>
#include <utility>

#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

namespace {

// An interrupted run (Ctrl-C, SIGTERM from a scheduler, SIGHUP when the terminal goes) must not
// leave temporary files behind: the handler unlinks every staged file (async-signal-safe) and
// passes the signal on to the handler it replaced, or to the default action. Signals ignored
// when the handler would be installed (nohup, background jobs of a non-interactive shell) are
// left ignored.
constexpr int kSlots = 32;
constexpr std::size_t kPathBytes = 4096;
struct Slot {
  char path[kPathBytes];
  volatile std::sig_atomic_t set;
};
Slot g_slots[kSlots];
bool g_slot_used[kSlots];  // guarded by slot_mutex(); only the owner touches a used slot's path

constexpr int kSignals[3] = {SIGINT, SIGTERM, SIGHUP};
struct sigaction g_previous[3];

std::mutex& slot_mutex() {
  static std::mutex mutex;
  return mutex;
}

extern "C" void remove_temporaries_and_pass_on(int signal_number, siginfo_t* info, void* context) {
  const int saved_errno = errno;
  for (Slot& slot : g_slots)
    if (slot.set) ::unlink(slot.path);
  for (int i = 0; i < 3; ++i) {
    if (kSignals[i] != signal_number) continue;
    const struct sigaction& previous = g_previous[i];
    if (previous.sa_flags & SA_SIGINFO) {
      previous.sa_sigaction(signal_number, info, context);
    } else if (previous.sa_handler != SIG_DFL && previous.sa_handler != SIG_IGN) {
      previous.sa_handler(signal_number);
    } else {  // the default action (ends the process) with the usual exit status
      ::sigaction(signal_number, &previous, nullptr);
      ::raise(signal_number);
    }
  }
  errno = saved_errno;
}

void install_handlers_once() {
  static const bool installed = [] {
    for (int i = 0; i < 3; ++i) {
      struct sigaction current {};
      if (::sigaction(kSignals[i], nullptr, &current) != 0) continue;
      if (!(current.sa_flags & SA_SIGINFO) && current.sa_handler == SIG_IGN) continue;  // stays ignored
      g_previous[i] = current;
      struct sigaction ours {};
      ours.sa_sigaction = remove_temporaries_and_pass_on;
      ours.sa_flags = SA_SIGINFO | SA_RESTART;
      sigemptyset(&ours.sa_mask);
      ::sigaction(kSignals[i], &ours, nullptr);
    }
    return true;
  }();
  (void)installed;
}

/// A slot holding path for the signal handler, or -1 when none is free or the path too long
/// (the file is then still removed on errors, not on signals).
int watch(const std::string& path) {
  std::lock_guard<std::mutex> lock(slot_mutex());
  if (path.size() >= kPathBytes) return -1;
  for (int s = 0; s < kSlots; ++s) {
    if (g_slot_used[s]) continue;
    g_slot_used[s] = true;
    g_slots[s].set = 0;
    std::memcpy(g_slots[s].path, path.c_str(), path.size() + 1);
    g_slots[s].set = 1;
    return s;
  }
  return -1;
}

void unwatch(int slot) {
  if (slot < 0) return;
  std::lock_guard<std::mutex> lock(slot_mutex());
  g_slots[slot].set = 0;
  g_slot_used[slot] = false;
}

std::string errno_text(int error) { return std::strerror(error); }

}  // namespace

void TemporaryOutput::check_target(const std::string& target, bool overwrite, const std::string& replace_hint) {
  if (target.empty()) throw UsageError("an output file name is needed");
  struct stat followed {};
  if (::stat(target.c_str(), &followed) == 0 && S_ISDIR(followed.st_mode))
    throw UsageError(target + ": is a directory; expected the name of the output file");
  struct stat own {};
  if (!overwrite && ::lstat(target.c_str(), &own) == 0) {
    if (S_ISLNK(own.st_mode) && ::stat(target.c_str(), &followed) != 0)
      throw UsageError(target + ": exists (a symbolic link to a missing file); " + replace_hint);
    throw UsageError(target + ": exists; " + replace_hint);
  }
  namespace fs = std::filesystem;
  std::error_code ec;
  const fs::path parent = fs::path(target).parent_path();
  if (!parent.empty() && !fs::is_directory(parent, ec))
    throw UsageError(target + ": output folder " + parent.string() + " does not exist");
}

TemporaryOutput::TemporaryOutput(std::string target, bool overwrite, const std::string& replace_hint)
    : overwrite_(overwrite) {
  check_target(target, overwrite, replace_hint);
  install_handlers_once();
  add(target);
}

TemporaryOutput::~TemporaryOutput() { remove_temporaries(); }

void TemporaryOutput::add(const std::string& target) {
  File file;
  file.target = target;
  file.temporary = target + ".tmp-" + std::to_string(::getpid());
  files_.push_back(file);
  files_.back().slot = watch(files_.back().temporary);
}

const std::string& TemporaryOutput::stage_side_file(const std::string& side_target) {
  if (committed_) throw Error(side_target + ": staged after its output was committed");
  check_target(side_target, overwrite_, "use --overwrite to replace it");
  add(side_target);
  return files_.back().temporary;
}

void TemporaryOutput::remove_temporaries() noexcept {
  for (File& file : files_) {
    if (!committed_) ::unlink(file.temporary.c_str());
    unwatch(file.slot);
    file.slot = -1;
  }
}

void TemporaryOutput::commit() {
  if (committed_) return;
  for (File& file : files_) {  // each one must be there: a missing file is a writer's bug
    struct stat st {};
    if (::lstat(file.temporary.c_str(), &st) != 0)
      throw Error(file.target + ": the file written for it is gone (" + errno_text(errno) + ")");
  }
  if (overwrite_) {
    for (File& file : files_)
      if (::rename(file.temporary.c_str(), file.target.c_str()) != 0) {
        const int error = errno;
        if (error == EISDIR || error == ENOTDIR)
          throw UsageError(file.target + ": cannot replace it (" + errno_text(error) + ")");
        throw Error(file.target + ": cannot put the output into place: " + errno_text(error));
      }
  } else {
    for (std::size_t i = 0; i < files_.size(); ++i) {
      if (::link(files_[i].temporary.c_str(), files_[i].target.c_str()) == 0) continue;
      const int error = errno;
      for (std::size_t j = 0; j < i; ++j) ::unlink(files_[j].target.c_str());  // all or nothing
      if (error == EEXIST)
        throw UsageError(files_[i].target +
                         ": appeared while this run was writing it (another run?); left as it is, this run's output "
                         "discarded; use --overwrite to replace it");
      throw Error(files_[i].target + ": cannot put the output into place: " + errno_text(error));
    }
    for (File& file : files_) ::unlink(file.temporary.c_str());
  }
  committed_ = true;
  remove_temporaries();
}

ScratchFile::ScratchFile(std::string path) : path_(std::move(path)) {
  install_handlers_once();
  slot_ = watch(path_);
}

ScratchFile::~ScratchFile() {
  ::unlink(path_.c_str());
  unwatch(slot_);
}

}  // namespace latentlift::io::detail
