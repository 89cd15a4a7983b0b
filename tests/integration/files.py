"""File comparisons shared by the end-to-end tests (imported from the
scripts' own folder)."""
import hashlib

import h5py
import numpy as np

# Attributes that hold object references, which differ between two files
# with the same content.
REFERENCE_ATTRIBUTES = ("DIMENSION_LIST", "REFERENCE_LIST")


def digest(path):
    """SHA-256 of a file's bytes."""
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def same_files(a_path, b_path, attributes=True):
    """(equal, the first difference) of two HDF5 files: the same objects,
    every dataset equal (NaN equal to NaN) and, with `attributes`, every
    dataset and root attribute equal (reference attributes left out)."""
    def same_attributes(x, y, where):
        for k in x.attrs:
            if k in REFERENCE_ATTRIBUTES:
                continue
            if k not in y.attrs or str(x.attrs[k]) != str(y.attrs[k]):
                return f"attribute {where}@{k} differs"
        return ""

    with h5py.File(a_path) as a, h5py.File(b_path) as b:
        names_a, names_b = [], []
        a.visit(names_a.append)
        b.visit(names_b.append)
        if sorted(names_a) != sorted(names_b):
            return False, f"objects differ: {set(names_a) ^ set(names_b)}"
        for n in names_a:
            if not isinstance(a[n], h5py.Dataset):
                continue
            x, y = a[n][()], b[n][()]
            eq = (np.array_equal(x, y, equal_nan=True) if np.asarray(x).dtype.kind == "f"
                  else np.array_equal(x, y))
            if not eq:
                return False, f"dataset {n} differs"
            if attributes and (why := same_attributes(a[n], b[n], n)):
                return False, why
        if attributes and (why := same_attributes(a, b, "")):
            return False, why
    return True, ""
