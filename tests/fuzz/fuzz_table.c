/* libFuzzer harness of the hopping-table reader (hop_read), spinless and spinful. */
#include "fuzz_common.h"

#include "bandsieve/hopfile.h"
#include "bandsieve/model.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_file(".dat", data, size);
    for (int spinful = 0; spinful < 2; spinful++) {
        tb_model *m = NULL;
        bs_err err;
        bs_err_clear(&err);
        int rc = hop_read(path, spinful, &m, &err);
        if ((rc == 0) != (m != NULL) || (rc != 0 && err.code == 0)) abort();
        tb_model_free(m);
    }
    return 0;
}
