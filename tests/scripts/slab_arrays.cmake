# `bandsieve slab --arrays`: surface spectra as HDF5 datasets (tests/scripts/slab_arrays.py).
add_test(NAME slab_arrays COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/slab_arrays.py
         $<TARGET_FILE:bandsieve> ${CMAKE_BINARY_DIR}/slab-arrays-work)
set_tests_properties(slab_arrays PROPERTIES LABELS "surface;script" TIMEOUT 300)
