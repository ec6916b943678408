// The first exception thrown inside an OpenMP region (an exception must not leave one).
#pragma once

#include <exception>

namespace latentlift::io::detail {

class FirstFailure {
 public:
  void capture() {  // call from a catch block
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp critical(latentlift_first_failure)
#endif
    if (!failure_) failure_ = std::current_exception();
  }
  void rethrow() const {
    if (failure_) std::rethrow_exception(failure_);
  }

 private:
  std::exception_ptr failure_;
};

}  // namespace latentlift::io::detail
