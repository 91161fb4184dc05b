# End-to-end tests of the screening run under mpirun (tests/scripts/pipeline_test.py).
foreach(case identity pack_check merge ranks resume broken query_rescreen surfaces_transport crash_journal groups
             exit_status rescreen_missing leftovers)
  add_test(NAME pipeline_${case}
           COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/pipeline_test.py $<TARGET_FILE:bandsieve>
                   ${case} ${CMAKE_BINARY_DIR}/pipeline-work)
  set_tests_properties(pipeline_${case} PROPERTIES LABELS "pipeline;mpi" TIMEOUT 600
    ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1")
endforeach()
