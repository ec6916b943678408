// The latentlift executable: a thin shell over cli::run (src/cli).
#include "latentlift/cli.hpp"

int main(int argc, char** argv) { return latentlift::cli::run(argc, argv); }
