/* The one JSON form of a diagnosis result (result.h): the object of `inspect --json`, of the wire
 * between ranks and of the catalogue's `diagnosis` column. Every key is written here and nowhere
 * else; the key table is in result_json.c. Not for the numerical layers: they fill the struct. */
#ifndef BANDSIEVE_RESULT_JSON_H
#define BANDSIEVE_RESULT_JSON_H

#include <cjson/cJSON.h>

#include <stddef.h>

#include "bandsieve/err.h"
#include "bandsieve/result.h"

/* The object for r (borrowed); the caller owns it (cJSON_Delete), NULL when out of memory.
 * "wcc_flows" only when with_flows is set and r has flows; "ahc", "shc" and "transport" when
 * r->has_transport; "surface" when r->has_surface. */
cJSON *res_to_json(const res_diag *r, int with_flows);

/* The same object as unformatted text; the caller frees it (cJSON_free), NULL when out of memory. */
char *res_to_text(const res_diag *r, int with_flows);

/* Reads the object o (borrowed) into r (res_init'ed or holding an earlier result, which is cleared
 * first). Missing or null keys keep the values of an empty result (res_init). The statuses that are
 * not keys of their own are inferred so that res_to_json(r) gives o again: an index list present
 * means its method is done; a 3D gap closing means every node chirality is an integer, a Weyl node
 * of chirality 0 that some is not. Not kept by the JSON form and so zero after reading: the
 * energies of gap closings, the component errors of the anomalous Hall conductivity other than
 * the largest, transport's err_total, the surface band edges. BS_EPARSE naming the key for a key
 * of the wrong type; BS_ENOMEM. On error r is empty again. */
int res_from_json(const cJSON *o, res_diag *r, bs_err *err);

/* As res_from_json from len bytes of JSON text (as received from a worker); trailing blanks are
 * allowed. BS_EPARSE with the byte offset for malformed text or bytes after the object. */
int res_from_text(const char *text, size_t len, res_diag *r, bs_err *err);

/* One value of a results column. */
typedef enum res_value_type { RES_VALUE_INT, RES_VALUE_REAL, RES_VALUE_TEXT } res_value_type;
typedef struct res_value {
    res_value_type type;
    long long i;
    double x;
    const char *text; /* borrowed from r or a static name table */
} res_value;

/* Calls fn(ctx, column, value) for every scalar key of the JSON form that has a catalogue column
 * (its name in the key table), in table order; stops at the first nonzero return and returns it.
 * The structured keys (index lists, Chern numbers, nodes, transport) are the catalogue's to bind.
 * A new scalar field with a column is then one struct member, one key-table row and one line of
 * db/schema.sql. */
int res_for_each_column(const res_diag *r, int (*fn)(void *ctx, const char *column, const res_value *v),
                        void *ctx);

#endif
