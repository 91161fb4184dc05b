# Fault tests (issue 15): full disk, unwritable artifacts, corrupt sets, queries, validation,
# memory budgets, random kills (tests/scripts/faults_test.py).
foreach(case disk_full artifact_unwritable corrupt_set queries validation memory)
  add_test(NAME faults_${case}
           COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/faults_test.py $<TARGET_FILE:bandsieve>
                   ${case} ${CMAKE_BINARY_DIR}/faults-work)
  set_tests_properties(faults_${case} PROPERTIES LABELS "faults" TIMEOUT 600
    ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1" SKIP_RETURN_CODE 77)
endforeach()
foreach(case kill_campaign)
  add_test(NAME faults_${case}
           COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/faults_test.py $<TARGET_FILE:bandsieve>
                   ${case} ${CMAKE_BINARY_DIR}/faults-work)
  set_tests_properties(faults_${case} PROPERTIES LABELS "faults;campaign" TIMEOUT 600
    ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1")
endforeach()
# Fuzz smoke run: the three readers under libFuzzer for a few seconds each (clang from Debian).
add_test(NAME faults_fuzz_smoke
         COMMAND bash ${CMAKE_CURRENT_LIST_DIR}/../fuzz/run.sh $<TARGET_FILE:bandsieve>
                 ${CMAKE_BINARY_DIR}/fuzz-work 8)
set_tests_properties(faults_fuzz_smoke PROPERTIES LABELS "faults;campaign" TIMEOUT 900)
