/* SVG writer: structure of the output (one cell per grid point, axis captions, colour scale),
 * escaping, and refusals. Rendering in a browser is checked by tests/scripts/surface_cli.py. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/svgplot.h"

static char *slurp(FILE *f)
{
    long n = ftell(f);
    rewind(f);
    char *buf = calloc((size_t)n + 1, 1);
    assert_int_equal(fread(buf, 1, (size_t)n, f), (size_t)n);
    return buf;
}

static int count(const char *hay, const char *needle)
{
    int c = 0;
    for (const char *p = hay; (p = strstr(p, needle)); p++) c++;
    return c;
}

static void test_heatmap_structure(void **state)
{
    (void)state;
    double z[6 * 4];
    for (int i = 0; i < 24; i++) z[i] = i * 0.5;
    svg_axes ax = {"title <A&B>", "k1", "k2", "A (1/eV)", -0.5, 0.5, -0.5, 0.5, 0, NULL, NULL};
    FILE *f = tmpfile();
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(svg_heatmap(f, 6, 4, z, &ax, 0, &err), 0);
    char *s = slurp(f);
    assert_non_null(strstr(s, "<svg xmlns=\"http://www.w3.org/2000/svg\""));
    assert_non_null(strstr(s, "</svg>"));
    assert_non_null(strstr(s, "title &lt;A&amp;B&gt;"));
    assert_non_null(strstr(s, ">k1</text>"));
    assert_non_null(strstr(s, ">k2</text>"));
    assert_non_null(strstr(s, ">A (1/eV)</text>"));
    /* 24 cells + 64 colour-bar steps + white page + 2 frames. */
    assert_int_equal(count(s, "<rect"), 24 + 64 + 1 + 2);
    /* Lowest and highest values take the ends of the ramp: (18,24,64) and (252,244,220). */
    assert_non_null(strstr(s, "rgb(18,24,64)"));
    assert_non_null(strstr(s, "rgb(252,244,220)"));
    free(s);
    fclose(f);
}

static void test_scatter_and_ticks(void **state)
{
    (void)state;
    double x[3] = {0, 1, 5}, y[3] = {0, 0.5, 0}, c[3] = {-1, 1, 0};
    double xt[2] = {0, 1};
    const char *xl[2] = {"G", "X"};
    svg_axes ax = {"bands", "path", "E (eV)", "w", 0, 1, -1, 1, 2, xt, xl};
    FILE *f = tmpfile();
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(svg_scatter(f, 3, x, y, c, &ax, &err), 0);
    char *s = slurp(f);
    assert_int_equal(count(s, "<circle"), 2);    /* x = 5 lies outside the range */
    assert_non_null(strstr(s, "rgb(40,80,200)"));
    assert_non_null(strstr(s, "rgb(210,40,40)"));
    assert_non_null(strstr(s, ">G</text>"));
    free(s);
    fclose(f);
}

static void test_refusals(void **state)
{
    (void)state;
    double z[4] = {1, 2, NAN, 4};
    svg_axes ax = {"t", "x", "y", "c", 0, 1, 0, 1, 0, NULL, NULL};
    bs_err err;
    FILE *f = tmpfile();
    bs_err_clear(&err);
    assert_int_equal(svg_heatmap(f, 2, 2, z, &ax, 0, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "not finite"));
    z[2] = 3;
    svg_axes bad = ax;
    bad.x1 = bad.x0;
    bs_err_clear(&err);
    assert_int_equal(svg_heatmap(f, 2, 2, z, &bad, 0, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(svg_heatmap(f, 0, 2, z, &ax, 0, &err), BS_EINVAL);
    fclose(f);
    bs_err_clear(&err);
    assert_int_equal(svg_heatmap_file("/nonexistent-dir/x.svg", 2, 2, z, &ax, 1, &err), BS_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent-dir/x.svg"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_heatmap_structure),
        cmocka_unit_test(test_scatter_and_ticks),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
