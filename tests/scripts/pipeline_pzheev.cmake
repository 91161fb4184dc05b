# ScaLAPACK eigensolver against LAPACK under mpirun at 2 and 4 ranks (4 oversubscribes the 2 cores).
add_executable(pipeline_mpi_pzheev ${CMAKE_CURRENT_LIST_DIR}/../pipeline/mpi_pzheev.c)
target_link_libraries(pipeline_mpi_pzheev PRIVATE ${BS_ALL_LIBS})
foreach(np 2 4)
  add_test(NAME pipeline_pzheev_np${np}
           COMMAND ${MPIEXEC_EXECUTABLE} -n ${np} --oversubscribe $<TARGET_FILE:pipeline_mpi_pzheev>)
  set_tests_properties(pipeline_pzheev_np${np} PROPERTIES LABELS "script;pipeline;mpi" TIMEOUT 300
    ENVIRONMENT "OMPI_ALLOW_RUN_AS_ROOT=1;OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1;OPENBLAS_NUM_THREADS=1;OMPI_MCA_mpi_yield_when_idle=1")
endforeach()
