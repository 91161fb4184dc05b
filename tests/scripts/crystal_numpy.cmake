# Symmetry eigenvalues of `bandsieve symmetry` against an independent numpy construction of the
# operators in the position gauge (Kane-Mele and BHZ).
add_test(NAME crystal_numpy
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/crystal_numpy.py $<TARGET_FILE:bandsieve>)
set_tests_properties(crystal_numpy PROPERTIES LABELS "script;symmetry" TIMEOUT 300)
