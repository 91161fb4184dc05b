/* A group of ranks that diagonalises large materials together: its members run the diagnosis in
 * lockstep and hand every eigenproblem of the material's size to ScaLAPACK over the group's
 * communicator (include/bandsieve/pzheev.h). Private to src/pipeline. */
#ifndef BANDSIEVE_PIPELINE_GROUP_H
#define BANDSIEVE_PIPELINE_GROUP_H

#include <mpi.h>

#include "bandsieve/eig.h"

typedef struct pl_group pl_group;

/* A group over comm (borrowed; it must outlive the group); problems of at least min_n states go
 * to ScaLAPACK. The caller owns *out. */
int pl_group_create(MPI_Comm comm, int min_n, pl_group **out, bs_err *err);

/* Frees g and its ScaLAPACK context. Collective on the group's communicator; accepts NULL. */
void pl_group_free(pl_group *g);

/* The solver to plug into a model's eig_dist (borrowed from g). */
const eig_dist *pl_group_solver(pl_group *g);

#endif
