#include "support/test_support.hpp"

#include <sys/wait.h>

#include <array>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <stdexcept>

namespace latentlift::test {

std::string test_dir() { return LATENTLIFT_TEST_DIR; }

std::string real_data_dir() {
  if (const char* env = std::getenv("LATENTLIFT_SHARED_DIR")) return std::string(env) + "/real-data";
  return std::string(LATENTLIFT_SHARED_DIR) + "/real-data";
}

std::string binary() { return LATENTLIFT_BINARY; }

std::string scratch_dir(const std::string& name) {
  namespace fs = std::filesystem;
  fs::path dir = fs::path(LATENTLIFT_BUILD_DIR) / "test-scratch" / name;
  fs::remove_all(dir);
  fs::create_directories(dir);
  return dir.string();
}

std::string python() {
  if (const char* env = std::getenv("LATENTLIFT_PYTHON")) return env;
  return "/usr/bin/python3";
}

CommandResult run_command(const std::string& command) {
  std::string full = command + " 2>&1";
  FILE* pipe = popen(full.c_str(), "r");
  if (!pipe) throw std::runtime_error("cannot run: " + command);
  std::string output;
  std::array<char, 4096> buffer{};
  while (size_t n = fread(buffer.data(), 1, buffer.size(), pipe)) output.append(buffer.data(), n);
  int status = pclose(pipe);
  int code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  return {code, output};
}

}  // namespace latentlift::test
