/* The plot module: colour-map properties, device choice by extension, and the curves-with-intervals
 * figure that other modules call (parameter paths). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include <cmocka.h>

#include "bandsieve/plot.h"
#include "testutil.h"

/* Relative luminance of an sRGB colour (the sRGB transfer curve, IEC 61966-2-1; common practice). */
static double luminance(const double rgb[3])
{
    double lin[3];
    for (int i = 0; i < 3; i++)
        lin[i] = rgb[i] <= 0.04045 ? rgb[i] / 12.92 : pow((rgb[i] + 0.055) / 1.055, 2.4);
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2];
}

/* Sequential map: luminance strictly rising, so order reads in grey (common practice for
 * magnitude maps); a rise of at least 0.5 from end to end keeps the ends far apart. */
static void test_sequential_luminance(void **state)
{
    double prev = -1, rgb[3], first = 0;
    for (int i = 0; i <= 256; i++) {
        plot_cmap_rgb(PLOT_SEQUENTIAL, i / 256.0, rgb);
        double l = luminance(rgb);
        if (i == 0) first = l;
        assert_true(l > prev);
        prev = l;
    }
    assert_true(prev - first > 0.5);
}

/* Diverging map: at every magnitude the negative side is darker than the positive side (the sign
 * survives a grey print), and hue differs (blue against orange: the blue channel dominates on the
 * negative side, red on the positive side, so no red/green contrast is needed). */
static void test_diverging_sign(void **state)
{
    double neg[3], pos[3];
    for (int i = 1; i <= 128; i++) {
        double t = i / 256.0;
        plot_cmap_rgb(PLOT_DIVERGING, 0.5 - t, neg);
        plot_cmap_rgb(PLOT_DIVERGING, 0.5 + t, pos);
        assert_true(luminance(neg) < luminance(pos));
        if (i > 32) {
            assert_true(neg[2] > neg[0]);
            assert_true(pos[0] > pos[2]);
        }
    }
}

static void test_bad_extension(void **state)
{
    plot_fig *f = NULL;
    bs_err err;
    bs_err_clear(&err);
    int rc = plot_open("/tmp/bandsieve-figure.gif", 800, 600, 1, 1, &f, &err);
    assert_int_equal(rc, plot_available() ? BS_EINVAL : BS_EUNSUPPORTED);
    assert_null(f);
}

/* x-y curves with shaded intervals into PNG and SVG: files exist and are not trivially small; the
 * SVG holds the axis labels as text (PLplot writes them as character entities: 'g' is &#x67;). */
static void test_curves_file(void **state)
{
    if (!plot_available()) skip();
    char dir[256], png[300], svg[300];
    assert_int_equal(bs_test_tmpdir(dir, sizeof dir, "plot"), 0);
    snprintf(png, sizeof png, "%s/path.png", dir);
    snprintf(svg, sizeof svg, "%s/path.svg", dir);
    double x[50], y1[50], y2[50];
    for (int i = 0; i < 50; i++)
        x[i] = i / 49.0, y1[i] = sin(6 * x[i]), y2[i] = cos(6 * x[i]);
    plot_series s[2] = {{"gap", 50, x, y1, PLOT_INK, 0}, {"other", 50, x, y2, PLOT_BLUE, 1}};
    plot_interval iv[1] = {{0.3, 0.5, "Weyl"}};
    plot_axes ax = {"a path", "parameter", "gap (eV)", 0, 1, -1.2, 1.2, 0, NULL, NULL, 0};
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(plot_curves_file(png, &ax, 2, s, 1, iv, &err), 0);
    assert_int_equal(plot_curves_file(svg, &ax, 2, s, 1, iv, &err), 0);
    struct stat st;
    assert_int_equal(stat(png, &st), 0);
    assert_true(st.st_size > 2000);
    FILE *fp = fopen(svg, "r");
    assert_non_null(fp);
    static char text[400000];
    size_t n = fread(text, 1, sizeof text - 1, fp);
    fclose(fp);
    text[n] = '\0';
    /* "gap (eV)" as PLplot's entities. */
    assert_non_null(strstr(text, "&#x67;&#x61;&#x70;&#x20;&#x28;&#x65;&#x56;&#x29;"));
    bs_test_rmtree(dir);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sequential_luminance),
        cmocka_unit_test(test_diverging_sign),
        cmocka_unit_test(test_bad_extension),
        cmocka_unit_test(test_curves_file),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
