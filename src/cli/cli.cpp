// Placeholder until the CLI lands (replaced by the command-line module).
#include <cstdio>

#include "latentlift/cli.hpp"

namespace latentlift::cli {
int run(int, char**) {
  std::fputs("latentlift: command line not built yet\n", stderr);
  return 1;
}
}  // namespace latentlift::cli
