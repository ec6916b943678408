#include "io/temporary_output.hpp"

#include <unistd.h>

#include <csignal>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <system_error>

#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

namespace {

// An interrupted run (Ctrl-C, SIGTERM from a scheduler) must not leave its temporary file
// behind: the handler unlinks it (async-signal-safe) and passes the signal on to the handler
// it replaced (or the default action).
char g_path[4096] = {0};
volatile std::sig_atomic_t g_path_set = 0;
using Handler = void (*)(int);
constexpr int kSignals[3] = {SIGINT, SIGTERM, SIGHUP};
Handler g_previous[3] = {SIG_DFL, SIG_DFL, SIG_DFL};

extern "C" void remove_temporary_and_pass_on(int signal_number) {
  if (g_path_set) ::unlink(g_path);
  for (int i = 0; i < 3; ++i)
    if (kSignals[i] == signal_number) {
      const Handler previous = g_previous[i] == SIG_ERR || g_previous[i] == SIG_IGN ? SIG_DFL : g_previous[i];
      std::signal(signal_number, previous);
    }
  std::raise(signal_number);
}

void watch(const std::string& path) {
  static const bool installed = [] {
    for (int i = 0; i < 3; ++i) g_previous[i] = std::signal(kSignals[i], remove_temporary_and_pass_on);
    return true;
  }();
  (void)installed;
  g_path_set = 0;
  if (path.size() < sizeof g_path) {
    std::memcpy(g_path, path.c_str(), path.size() + 1);
    g_path_set = 1;
  }
}

}  // namespace

TemporaryOutput::TemporaryOutput(std::string target)
    : target_(std::move(target)), path_(target_ + ".tmp-" + std::to_string(::getpid())) {
  watch(path_);
}

TemporaryOutput::~TemporaryOutput() {
  g_path_set = 0;
  if (!committed_) std::remove(path_.c_str());
}

void TemporaryOutput::commit() {
  std::error_code ec;
  std::filesystem::rename(path_, target_, ec);
  if (ec) throw Error(target_ + ": cannot rename " + path_ + " into place: " + ec.message());
  committed_ = true;
  g_path_set = 0;
}

}  // namespace latentlift::io::detail
