# Test helpers: every test carries a label (unit, mpi, external, slow, slurm).
find_package(GTest REQUIRED)
include(GoogleTest)

set(SPINFLIP_PYTHON /usr/bin/python3 CACHE FILEPATH "Debian python with numpy/scipy/h5py/astropy")
# mpiexec must work as root in containers and CI, and oversubscribe a 2-core box.
# Tests keep FFT wisdom in the build tree (not the user's cache) and share it, so a
# shape is measured once per suite (docs/driver.md, "FFT plans").
set(SPINFLIP_TEST_CACHE "XDG_CACHE_HOME=${PROJECT_BINARY_DIR}/test-cache")
set(SPINFLIP_MPI_ENV "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1;OMPI_MCA_rmaps_base_oversubscribe=1;OMPI_MCA_btl_vader_single_copy_mechanism=none;${SPINFLIP_TEST_CACHE}")

# spinflip_add_gtest(NAME src... LIBS libs... [LABELS l...])
function(spinflip_add_gtest name)
  cmake_parse_arguments(T "" "" "SOURCES;LIBS;LABELS" ${ARGN})
  add_executable(${name} ${T_SOURCES})
  target_link_libraries(${name} PRIVATE ${T_LIBS} GTest::gtest GTest::gtest_main spinflip_options)
  if(NOT T_LABELS)
    set(T_LABELS unit)
  endif()
  gtest_discover_tests(${name} PROPERTIES LABELS "${T_LABELS}" ENVIRONMENT "${SPINFLIP_TEST_CACHE}" DISCOVERY_TIMEOUT 60)
endfunction()

# spinflip_add_mpi_test(NAME SOURCES ... LIBS ... RANKS 1 2 4): one ctest per rank
# count, the executable runs its own MPI_Init (tests/support/mpi_main.cpp).
function(spinflip_add_mpi_test name)
  cmake_parse_arguments(T "" "TIMEOUT" "SOURCES;LIBS;RANKS;LABELS" ${ARGN})
  add_executable(${name} ${T_SOURCES} ${PROJECT_SOURCE_DIR}/tests/support/mpi_main.cpp)
  target_link_libraries(${name} PRIVATE ${T_LIBS} GTest::gtest MPI::MPI_CXX spinflip_options)
  if(NOT T_RANKS)
    set(T_RANKS 1 2 4)
  endif()
  if(NOT T_TIMEOUT)
    set(T_TIMEOUT 300)
  endif()
  foreach(n IN LISTS T_RANKS)
    add_test(NAME ${name}.np${n}
             COMMAND ${MPIEXEC_EXECUTABLE} ${MPIEXEC_NUMPROC_FLAG} ${n} --oversubscribe
                     ${MPIEXEC_PREFLAGS} $<TARGET_FILE:${name}> ${MPIEXEC_POSTFLAGS})
    set_tests_properties(${name}.np${n} PROPERTIES LABELS "mpi;${T_LABELS}"
                         ENVIRONMENT "${SPINFLIP_MPI_ENV}" TIMEOUT ${T_TIMEOUT})
  endforeach()
endfunction()

# spinflip_add_python_test(NAME script.py [ARGS ...] [LABELS ...]): external checks
# against Debian's numpy/scipy/astropy/h5py. The script gets SPINFLIP (the CLI path)
# and SPINFLIP_SOURCE_DIR in its environment.
function(spinflip_add_python_test name script)
  cmake_parse_arguments(T "" "TIMEOUT" "ARGS;LABELS" ${ARGN})
  if(NOT T_LABELS)
    set(T_LABELS external)
  endif()
  if(NOT T_TIMEOUT)
    set(T_TIMEOUT 600)
  endif()
  add_test(NAME ${name} COMMAND ${SPINFLIP_PYTHON} ${script} ${T_ARGS})
  set_tests_properties(${name} PROPERTIES LABELS "${T_LABELS}" TIMEOUT ${T_TIMEOUT}
    ENVIRONMENT "SPINFLIP=$<TARGET_FILE:spinflip>;SPINFLIP_SOURCE_DIR=${PROJECT_SOURCE_DIR};SPINFLIP_BINARY_DIR=${PROJECT_BINARY_DIR};PYTHONPATH=${PROJECT_SOURCE_DIR}/python;${SPINFLIP_MPI_ENV};MPIEXEC=${MPIEXEC_EXECUTABLE}")
endfunction()
