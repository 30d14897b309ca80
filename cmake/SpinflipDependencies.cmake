# Every external dependency, found once. Each failure says which Debian
# package provides it (deploy/install-debian.sh installs them all).
find_package(MPI REQUIRED COMPONENTS C CXX)
find_package(PkgConfig REQUIRED)

set(HDF5_PREFER_PARALLEL TRUE)
find_package(HDF5 REQUIRED COMPONENTS C)
if(NOT HDF5_IS_PARALLEL)
  message(FATAL_ERROR "spinflip needs parallel HDF5: install libhdf5-openmpi-dev (deploy/install-debian.sh does)")
endif()
add_library(spinflip_hdf5 INTERFACE)
target_include_directories(spinflip_hdf5 INTERFACE ${HDF5_C_INCLUDE_DIRS} ${HDF5_INCLUDE_DIRS})
target_link_libraries(spinflip_hdf5 INTERFACE ${HDF5_C_LIBRARIES} ${HDF5_LIBRARIES} MPI::MPI_C)
target_compile_definitions(spinflip_hdf5 INTERFACE ${HDF5_DEFINITIONS} H5_USE_110_API)

pkg_check_modules(FFTW3F REQUIRED IMPORTED_TARGET fftw3f)
pkg_check_modules(FFTW3 REQUIRED IMPORTED_TARGET fftw3)
find_library(FFTW3F_MPI_LIB fftw3f_mpi)
find_library(FFTW3_MPI_LIB fftw3_mpi)
if(NOT FFTW3F_MPI_LIB OR NOT FFTW3_MPI_LIB)
  message(FATAL_ERROR "spinflip needs FFTW3 with MPI: install libfftw3-mpi-dev (deploy/install-debian.sh does)")
endif()
add_library(spinflip_fftw INTERFACE)
target_link_libraries(spinflip_fftw INTERFACE ${FFTW3F_MPI_LIB} ${FFTW3_MPI_LIB}
                      PkgConfig::FFTW3F PkgConfig::FFTW3 MPI::MPI_CXX)

find_package(spdlog REQUIRED)
find_package(fmt REQUIRED)
find_package(Eigen3 3.3 REQUIRED NO_MODULE)
find_package(CLI11 QUIET CONFIG)

find_path(TOMLPP_INCLUDE_DIR toml++/toml.h)
find_path(RANDOM123_INCLUDE_DIR Random123/philox.h)
foreach(dep TOMLPP RANDOM123)
  if(NOT ${dep}_INCLUDE_DIR)
    message(FATAL_ERROR "spinflip needs ${dep}: install libtomlplusplus-dev and librandom123-dev (deploy/install-debian.sh does)")
  endif()
endforeach()
find_path(CLI11_INCLUDE_DIR CLI/CLI.hpp)
if(NOT CLI11_INCLUDE_DIR)
  message(FATAL_ERROR "spinflip needs CLI11: install libcli11-dev (deploy/install-debian.sh does)")
endif()

find_package(Threads REQUIRED)
