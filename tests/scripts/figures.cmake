# Figures and reports rendered for built-in models and checked for content: pixels (PNG, PDF
# through pdftoppm, SVG and HTML through headless Chromium), labels as text, plotted data against
# published results (tests/scripts/figures.py).
add_test(NAME figures COMMAND ${BS_PYTHON} ${CMAKE_CURRENT_LIST_DIR}/figures.py
         $<TARGET_FILE:bandsieve> ${CMAKE_BINARY_DIR}/figures-work)
set_tests_properties(figures PROPERTIES LABELS "plot;script" TIMEOUT 300 ENVIRONMENT "OPENBLAS_NUM_THREADS=1")
