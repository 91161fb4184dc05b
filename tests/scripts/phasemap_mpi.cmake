# Phase map of the Fu-Kane-Mele model (dt x stag) under mpirun at 1 and 2 ranks: identical maps, one
# critical point on the inversion-symmetric line and a Weyl wedge growing with inversion breaking.
add_test(NAME phasemap_mpi
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/phasemap_mpi.py $<TARGET_FILE:bandsieve>
                 ${CMAKE_BINARY_DIR}/phasemap-work)
set_tests_properties(phasemap_mpi PROPERTIES LABELS "pipeline;mpi" TIMEOUT 600
  ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1")
