# Finds benchid's dependencies; a missing one stops configuration with the
# Debian package that provides it.
find_package(PkgConfig QUIET)

macro(benchid_missing what pkg)
  message(FATAL_ERROR "benchid: ${what} not found. On Debian: apt-get install ${pkg}")
endmacro()

find_package(Eigen3 3.3 QUIET NO_MODULE)
if(NOT TARGET Eigen3::Eigen)
  benchid_missing("Eigen 3 (>= 3.3)" "libeigen3-dev")
endif()

find_package(CLI11 2.1 QUIET CONFIG)
if(NOT TARGET CLI11::CLI11)
  benchid_missing("CLI11 (>= 2.1)" "libcli11-dev")
endif()

if(NOT PKG_CONFIG_FOUND)
  benchid_missing("pkg-config" "pkg-config")
endif()
pkg_check_modules(FFTW3 QUIET IMPORTED_TARGET fftw3>=3.3)
if(NOT FFTW3_FOUND)
  benchid_missing("FFTW 3 (double precision, >= 3.3)" "libfftw3-dev")
endif()
pkg_check_modules(SNDFILE QUIET IMPORTED_TARGET sndfile>=1.0.28)
if(NOT SNDFILE_FOUND)
  benchid_missing("libsndfile (>= 1.0.28)" "libsndfile1-dev")
endif()

find_package(nlohmann_json 3.2 QUIET)
if(NOT TARGET nlohmann_json::nlohmann_json)
  benchid_missing("nlohmann JSON (>= 3.2)" "nlohmann-json3-dev")
endif()

find_package(Threads REQUIRED)

if(BENCHID_TESTS)
  find_package(GTest 1.10 QUIET)
  if(NOT TARGET GTest::gtest_main)
    benchid_missing("GoogleTest (>= 1.10)" "libgtest-dev")
  endif()
endif()
