# Surface evidence over the strong topological insulators of the invented demo set
# (tests/scripts/surface_demo.py): an odd count on a pair the bulk parities call odd, or an
# explicit inconclusive verdict with its reason.
add_test(NAME surface_demo COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/surface_demo.py
         $<TARGET_FILE:bandsieve> ${CMAKE_BINARY_DIR}/surface-demo-work)
set_tests_properties(surface_demo PROPERTIES LABELS "surface;script" TIMEOUT 600)
