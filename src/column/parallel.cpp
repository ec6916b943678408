#include "latentlift/parallel.hpp"

#ifdef LATENTLIFT_HAVE_OPENMP
#include <omp.h>
#endif

namespace latentlift::parallel {

#ifdef LATENTLIFT_HAVE_OPENMP
int max_threads() { return omp_get_max_threads(); }
void set_threads(int n) {
  if (n > 0) omp_set_num_threads(n);
}
int thread_index() { return omp_get_thread_num(); }
#else
int max_threads() { return 1; }
void set_threads(int) {}
int thread_index() { return 0; }
#endif

}  // namespace latentlift::parallel
