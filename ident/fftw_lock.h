// FFTW's planner is not thread-safe (FFTW 3 manual, "Thread safety": only
// fftw_execute may be called from several threads at once). benchid plans
// through these wrappers, which serialise planning and plan destruction, so
// the pipeline can run on several threads (`benchid batch --jobs N`).
#pragma once

#include <fftw3.h>

#include <mutex>

namespace benchid {

inline std::mutex& fftw_planner_mutex() {
  static std::mutex m;
  return m;
}

inline fftw_plan locked_plan_dft_r2c_1d(int n, double* in, fftw_complex* out, unsigned flags) {
  const std::lock_guard<std::mutex> lock(fftw_planner_mutex());
  return fftw_plan_dft_r2c_1d(n, in, out, flags);
}

inline fftw_plan locked_plan_dft_c2r_1d(int n, fftw_complex* in, double* out, unsigned flags) {
  const std::lock_guard<std::mutex> lock(fftw_planner_mutex());
  return fftw_plan_dft_c2r_1d(n, in, out, flags);
}

inline void locked_destroy_plan(fftw_plan p) {
  const std::lock_guard<std::mutex> lock(fftw_planner_mutex());
  fftw_destroy_plan(p);
}

}  // namespace benchid
