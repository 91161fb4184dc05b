/* libFuzzer harness of the material-card reader (card_read): any bytes as a card whose hopping
 * table is the test fixture copied beside it by run.sh, so that mutations reach the table checks. */
#include "fuzz_common.h"

#include "bandsieve/card.h"
#include "bandsieve/model.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_file(".json", data, size);
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (card_read(path, &m, &err) == 0 && m == NULL) abort(); /* success must give a model */
    if (m == NULL && err.code == 0) abort();                  /* failure must say why */
    tb_model_free(m);
    return 0;
}
