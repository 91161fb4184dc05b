# Films over thickness (bandsieve path --direction --layers) against an independent numpy
# construction of the same films (Phys. Rev. B 81, 041307 (2010) for the thickness dependence).
add_test(NAME pathfilm_numpy
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/pathfilm_numpy.py $<TARGET_FILE:bandsieve>)
set_tests_properties(pathfilm_numpy PROPERTIES LABELS "script;surface" TIMEOUT 300)
