# Weyl window of the Fu-Kane-Mele model with a staggered potential: `bandsieve path` against an
# independent numpy scan (New J. Phys. 9, 356 (2007); Phys. Rev. B 78, 165313 (2008)).
add_test(NAME phasepath_numpy
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/phasepath_numpy.py $<TARGET_FILE:bandsieve>)
set_tests_properties(phasepath_numpy PROPERTIES LABELS "script;topology" TIMEOUT 600)
