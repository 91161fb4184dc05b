# Script-driven tests (numpy/scipy cross-checks, CLI behaviour, MPI runs): each tests/scripts/*.cmake
# registers its own. They use Debian's python3 (/usr/bin/python3) for numpy and scipy.
set(BS_PYTHON /usr/bin/python3)
file(GLOB _script_tests CONFIGURE_DEPENDS ${CMAKE_CURRENT_LIST_DIR}/scripts/*.cmake)
foreach(f ${_script_tests})
  include(${f})
endforeach()
