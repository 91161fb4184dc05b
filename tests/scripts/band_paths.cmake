# `bandsieve bands --path`: standard paths against Comput. Mater. Sci. 49, 299 (2010) on re-based
# cells, energies against numpy (tests/scripts/band_paths.py).
add_test(NAME band_paths COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/band_paths.py
         $<TARGET_FILE:bandsieve> ${CMAKE_BINARY_DIR}/band-paths-work)
set_tests_properties(band_paths PROPERTIES LABELS "kspace;script" TIMEOUT 120)
