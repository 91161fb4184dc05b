/* One self-contained HTML page per material: the verdict with its confidence and reason, every
 * piece of evidence with its figure (inline SVG, or PNG as base64 for maps), the README's caveats,
 * and the provenance. Built from the stored diagnosis JSON, so it works from a catalogue alone;
 * the model, when given, adds the figures that need H(k) (bands, Berry curvature). */
#ifndef BANDSIEVE_CLI_REPORT_H
#define BANDSIEVE_CLI_REPORT_H

#include <cjson/cJSON.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"

typedef struct rep_input {
    const cJSON *diag;     /* the diagnosis object (inspect --json / results.diagnosis) */
    const tb_model *model; /* NULL: figures that need H(k) are listed as not available */
    int nflow;
    const res_flow *flows;   /* stored or computed Wannier-centre flows; may be NULL */
    const char *flow_note;   /* why there are no flows, when nflow is 0; may be NULL */
    const cJSON *provenance; /* object of name -> value rows; may be NULL */
} rep_input;

/* Writes the page to out_path; figures are drawn into tmpdir (an existing folder the caller
 * removes). BS_EIO when a file cannot be written; figure failures become notes in the page. */
int rep_write(const rep_input *in, const char *out_path, const char *tmpdir, bs_err *err);

/* Centres of consecutive strings jumping over the largest-gap line, counted as in Phys. Rev. B
 * 84, 075119 (2011): its parity is the plane's Z2 index. */
int rep_flow_crossings(const res_flow *f);

#endif
