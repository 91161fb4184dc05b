# `screen --paths` under mpirun (tests/scripts/paths_screen.py): transitions against `bandsieve path`
# and published critical values; a path phase killed with SIGKILL resumes without losses or duplicates.
foreach(case transitions resume ranks journal)
  add_test(NAME paths_screen_${case}
           COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/paths_screen.py $<TARGET_FILE:bandsieve> ${case}
                   ${CMAKE_BINARY_DIR}/paths-screen-work)
  set_tests_properties(paths_screen_${case} PROPERTIES LABELS "pipeline;mpi;paths" TIMEOUT 900
    ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1")
endforeach()
