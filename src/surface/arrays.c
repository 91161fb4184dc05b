/* Named double arrays into an HDF5 file (see arrays.h). */
#include "bandsieve/arrays.h"

#include <hdf5.h>
#include <string.h>

static int put_string_attr(hid_t obj, const char *name, const char *text)
{
    hid_t type = H5Tcopy(H5T_C_S1);
    if (type < 0) return -1;
    H5Tset_size(type, strlen(text) + 1);
    hid_t space = H5Screate(H5S_SCALAR);
    hid_t attr = space >= 0 ? H5Acreate2(obj, name, type, space, H5P_DEFAULT, H5P_DEFAULT) : -1;
    int rc = attr >= 0 && H5Awrite(attr, type, text) >= 0 ? 0 : -1;
    if (attr >= 0) H5Aclose(attr);
    if (space >= 0) H5Sclose(space);
    H5Tclose(type);
    return rc;
}

int ar_write(const char *path, const char *source, const ar_array *arrays, int n, bs_err *err)
{
    H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
    hid_t file = H5Fcreate(path, H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    if (file < 0) return bs_fail(err, BS_EHDF5, "%s: cannot create the arrays file", path);
    int rc = 0;
    if (source && put_string_attr(file, "source", source) != 0)
        rc = bs_fail(err, BS_EHDF5, "%s: cannot write the source attribute", path);
    for (int i = 0; rc == 0 && i < n; i++) {
        const ar_array *a = &arrays[i];
        if (!a->data) continue;
        hsize_t dims[2] = {(hsize_t)a->dims[0], (hsize_t)(a->rank == 2 ? a->dims[1] : 1)};
        hid_t space = H5Screate_simple(a->rank, dims, NULL);
        hid_t ds = space >= 0 ? H5Dcreate2(file, a->name, H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT,
                                           H5P_DEFAULT)
                              : -1;
        if (ds < 0 || H5Dwrite(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, a->data) < 0 ||
            (a->note && put_string_attr(ds, "description", a->note) != 0))
            rc = bs_fail(err, BS_EHDF5, "%s:/%s: cannot write the dataset", path, a->name);
        if (ds >= 0) H5Dclose(ds);
        if (space >= 0) H5Sclose(space);
    }
    if (H5Fclose(file) < 0 && rc == 0) rc = bs_fail(err, BS_EHDF5, "%s: cannot close the arrays file", path);
    return rc;
}
