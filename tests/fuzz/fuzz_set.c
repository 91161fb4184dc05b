/* libFuzzer harness of the material-set reader (ms_open, ms_read of every entry): damaged HDF5
 * files must be refused with a message, never crash or overrun inside the reader. */
#include "fuzz_common.h"

#include <hdf5.h>

#include "bandsieve/matset.h"
#include "bandsieve/model.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static int quiet = 0;
    if (!quiet) {
        H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
        quiet = 1;
    }
    const char *path = fuzz_file(".h5", data, size);
    ms_set *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (ms_open(path, &s, &err) != 0) {
        if (err.code == 0) abort();
        return 0;
    }
    for (int i = 0; i < ms_count(s) && i < 64; i++) {
        tb_model *m = NULL;
        bs_err_clear(&err);
        if (ms_read(s, i, &m, &err) != 0 && err.code == 0) abort();
        tb_model_free(m);
    }
    ms_free(s);
    return 0;
}
