# `inspect --json` and the catalogue rows against the reference recorded before the result struct
# and its JSON module replaced the hand-written serialisers (tests/data/reference/result.json).
add_test(NAME result_reference
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/result_reference.py $<TARGET_FILE:bandsieve>
                 ${CMAKE_CURRENT_BINARY_DIR}/result_reference)
set_tests_properties(result_reference PROPERTIES LABELS "script;catalogue" TIMEOUT 900)
# The JSON round trip diagonalises small matrices: one BLAS thread avoids oversubscribing the cores.
if(TEST result_test_result_json)
  set_tests_properties(result_test_result_json PROPERTIES ENVIRONMENT "OPENBLAS_NUM_THREADS=1")
endif()
