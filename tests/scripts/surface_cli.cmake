# `bandsieve slab` end to end: slab Hamiltonians against numpy, published surface topology through
# the command line, the weyl Fermi-arc map and SVG rendering in headless Chromium, bad input.
add_test(NAME surface_cli
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/surface_cli.py $<TARGET_FILE:bandsieve>
                 ${CMAKE_CURRENT_BINARY_DIR}/surface_cli)
set_tests_properties(surface_cli PROPERTIES LABELS "script;surface" TIMEOUT 300)
# The surface unit tests diagonalise many small matrices: one BLAS thread avoids oversubscribing
# the shared cores (the tests are registered by tests/CMakeLists.txt before this file is read).
foreach(t surface_test_slab surface_test_surfstates surface_test_surfgreen surface_test_surfsummary)
  if(TEST ${t})
    set_tests_properties(${t} PROPERTIES ENVIRONMENT "OPENBLAS_NUM_THREADS=1")
  endif()
endforeach()
