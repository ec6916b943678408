#include "io/structure_probe.hpp"

#include <fcntl.h>
#include <netcdf.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstring>
#include <string>
#include <thread>
#include <vector>

#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

namespace {

constexpr int kOpenFailed = 3;  // nc_open's own error: the parent reports it with its message

bool starts_like_hdf5(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  unsigned char head[8] = {0};
  const bool ok = ::read(fd, head, sizeof head) == static_cast<ssize_t>(sizeof head) &&
                  std::memcmp(head, "\x89HDF\r\n\x1a\n", 8) == 0;
  ::close(fd);
  return ok;
}

/// The child: open, inquire everything netCDF-C reads lazily, exit without exit handlers.
[[noreturn]] void probe_in_child(const std::string& path) {
  const int null = ::open("/dev/null", O_WRONLY);
  if (null >= 0) {  // nothing the libraries (or a sanitizer) print here reaches the user
    ::dup2(null, STDOUT_FILENO);
    ::dup2(null, STDERR_FILENO);
  }
  for (int signal_number : {SIGINT, SIGTERM, SIGHUP}) ::signal(signal_number, SIG_DFL);
  int id = -1;
  if (nc_open(path.c_str(), NC_NOWRITE, &id) != NC_NOERR) ::_exit(kOpenFailed);
  int n_vars = 0, n_global = 0;
  nc_inq_nvars(id, &n_vars);
  nc_inq_natts(id, &n_global);
  char name[NC_MAX_NAME + 1];
  for (int a = 0; a < n_global; ++a) nc_inq_attname(id, NC_GLOBAL, a, name);
  std::vector<int> dims(NC_MAX_VAR_DIMS);
  for (int v = 0; v < n_vars; ++v) {
    nc_type type = NC_NAT;
    int n_dims = 0, n_atts = 0;
    nc_inq_var(id, v, name, &type, &n_dims, dims.data(), &n_atts);
    for (int a = 0; a < n_atts; ++a) {
      size_t length = 0;
      if (nc_inq_attname(id, v, a, name) == NC_NOERR) nc_inq_att(id, v, name, &type, &length);
    }
  }
  nc_close(id);
  ::_exit(0);
}

}  // namespace

void probe_netcdf4_structure(const std::string& path, const std::string& shown_as, double timeout_s) {
  if (!starts_like_hdf5(path)) return;
  const std::string& name = shown_as.empty() ? path : shown_as;
  const pid_t child = ::fork();
  if (child < 0) return;  // no probe possible: nc_open as before
  if (child == 0) probe_in_child(path);
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_s);
  auto pause = std::chrono::microseconds(200);
  int status = 0;
  for (;;) {
    const pid_t done = ::waitpid(child, &status, WNOHANG);
    if (done == child) break;
    if (done < 0) return;  // the child was reaped elsewhere (SIGCHLD ignored): no verdict
    if (std::chrono::steady_clock::now() > deadline) {
      ::kill(child, SIGKILL);
      ::waitpid(child, &status, 0);
      throw InputError(name, "", "a readable NetCDF file: this NetCDF-4/HDF5 file is damaged (reading its structure "
                                 "did not end within " + std::to_string(static_cast<int>(timeout_s)) + " s)");
    }
    std::this_thread::sleep_for(pause);
    pause = std::min(pause * 2, std::chrono::microseconds(20000));
  }
  if (WIFEXITED(status) && (WEXITSTATUS(status) == 0 || WEXITSTATUS(status) == kOpenFailed)) return;
  const std::string how = WIFSIGNALED(status) ? "the HDF5 library crashes reading its structure: signal " +
                                                    std::to_string(WTERMSIG(status))
                                              : "the HDF5 library fails reading its structure";
  throw InputError(name, "", "a readable NetCDF file: this NetCDF-4/HDF5 file is damaged (" + how + ")");
}

}  // namespace latentlift::io::detail
