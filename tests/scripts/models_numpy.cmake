# Independent numpy implementation of every built-in lattice model, compared with `bandsieve bands`.
add_test(NAME models_numpy
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/models_numpy.py $<TARGET_FILE:bandsieve>)
set_tests_properties(models_numpy PROPERTIES LABELS "script;model" TIMEOUT 300)
