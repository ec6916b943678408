// A small wrapper over OpenMP, so that the build works without it.
#pragma once

namespace latentlift::parallel {

/// Number of threads a parallel loop will use.
int max_threads();
/// Set the thread count for following parallel loops (n <= 0: leave the default).
void set_threads(int n);
/// This thread's index inside a parallel loop (0 outside).
int thread_index();

}  // namespace latentlift::parallel
