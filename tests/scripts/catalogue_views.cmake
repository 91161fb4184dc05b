# The catalogue views against their definition, and the query plans that keep them cheap at scale.
add_test(NAME catalogue_views
         COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/catalogue_views.py $<TARGET_FILE:bandsieve>
                 ${CMAKE_CURRENT_BINARY_DIR}/catalogue_views)
set_tests_properties(catalogue_views PROPERTIES LABELS "script;catalogue" TIMEOUT 120)
