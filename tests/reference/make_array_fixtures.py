"""Reference fixtures for the NumPy (.npy/.npz) and MATLAB level-5 (.mat) readers.

Run from the repository root with the pinned reference environment:

    .venv-ref/bin/python tests/reference/make_array_fixtures.py

Writes into tests/data/arrays/:
  * .npy files written by numpy.save (C and Fortran order, big-endian float64),
  * .npz archives written by numpy.savez / numpy.savez_compressed,
  * .mat files written by scipy.io.savemat (format='5', compressed and not),
  * two .mat files built byte by byte here from the published level-5 layout
    (MathWorks, "MAT-File Format", level 5), one big-endian and one compressed
    little-endian, holding what scipy never writes: element data types
    narrower than the array class, small data elements, logical sparse with
    uint8 data, a complex variable. Each is read back with scipy.io.loadmat as
    an independent check of the bytes,
  * expected.json: for each fixture and key, the shape, the element type
    (numpy name) and every value in row-major order as an exact float64
    string (Python repr, which round-trips; NaN as the hex of its bits).

The Rust tests compare against expected.json bit for bit, so `cargo test`
never needs Python. Every random draw is seeded. All data are invented.
"""

import json
import struct
import zlib
from pathlib import Path

import numpy as np
import scipy
import scipy.io
import scipy.sparse

OUT = Path(__file__).resolve().parent.parent / "data" / "arrays"
RNG = np.random.default_rng(20261201)

expected = []


def exact(v):
    """A float64 as an exact string: shortest round-trip repr, NaN as its bits."""
    f = float(v)
    if f != f:
        return "0x%016x" % struct.unpack("<Q", struct.pack("<d", f))[0]
    return repr(f)


def record(file, key, arr, *, sparse=False, dtype=None):
    dense = arr.toarray() if scipy.sparse.issparse(arr) else np.asarray(arr)
    expected.append(
        {
            "file": file,
            "key": key,
            "shape": list(dense.shape),
            "dtype": dtype or dense.dtype.name,
            "sparse": sparse,
            "values": [exact(v) for v in np.ascontiguousarray(dense).ravel(order="C")],
        }
    )


def small_arrays():
    """One small invented array per element type, with awkward values."""
    f64 = np.array(
        [[0.1, -0.0, 1e308, 5e-324], [np.nan, np.inf, -np.inf, 1 / 3], [2.5, -7.0, 1e-300, 12345.678]],
        dtype=np.float64,
    )
    f32 = np.array([[0.1, -2.5, 3.4e38], [1e-45, np.nan, -0.0]], dtype=np.float32)
    i32 = np.array([[-(2**31), 0, 2**31 - 1], [7, -8, 9], [1, 2, 3], [4, 5, 6]], dtype=np.int32)
    i64 = np.array([[-(2**53), 2**53], [-1, 1], [0, 123456789012]], dtype=np.int64)
    u8 = np.array([[0, 1, 127, 128, 255]], dtype=np.uint8).reshape(1, 5)
    b = np.array([[True, False, True], [False, False, True]])
    return {"float64": f64, "float32": f32, "int32": i32, "int64": i64, "uint8": u8, "bool": b}


def write_npy():
    for name, a in small_arrays().items():
        for order in ("c", "f"):
            file = f"{name}_{order}.npy"
            arr = np.asfortranarray(a) if order == "f" else np.ascontiguousarray(a)
            np.save(OUT / file, arr)
            assert np.load(OUT / file).flags["F_CONTIGUOUS" if order == "f" else "C_CONTIGUOUS"]
            record(file, None, a)
    be = small_arrays()["float64"].astype(">f8")
    np.save(OUT / "float64_be.npy", be)
    assert np.load(OUT / "float64_be.npy").dtype.str == ">f8"
    record("float64_be.npy", None, be, dtype="float64")
    cube = np.asfortranarray(np.arange(24, dtype=np.float64).reshape(2, 3, 4) - 11.5)
    np.save(OUT / "float64_3d_f.npy", cube)
    record("float64_3d_f.npy", None, cube)


def write_npz():
    counts = RNG.integers(0, 50, size=(5, 5)).astype(np.int32)
    weights = RNG.standard_normal((3, 4))
    np.savez(OUT / "two_stored.npz", counts=counts, weights=weights)
    np.savez_compressed(OUT / "two_compressed.npz", counts=counts, weights=weights)
    for file in ("two_stored.npz", "two_compressed.npz"):
        record(file, "counts", counts)
        record(file, "weights", weights)


def mat_numeric():
    """The variables of the numeric .mat fixtures, and their expected dtypes."""
    sp = scipy.sparse.random(6, 5, density=0.3, format="csc", random_state=7, dtype=np.float64)
    sp.data = np.round(sp.data * 10, 3)
    splog = scipy.sparse.csc_matrix(
        np.array([[True, False, False], [False, False, True], [True, True, False], [False, False, False]])
    )
    return {
        "counts": RNG.integers(0, 30, size=(4, 6)).astype(np.int32),
        "dbl": RNG.standard_normal((3, 5)),
        "sgl": RNG.standard_normal((2, 3)).astype(np.float32),
        "u8": np.array([[0, 200], [17, 255], [3, 4]], dtype=np.uint8),
        "mask": np.array([[True, False], [False, True], [True, True]]),
        "i8": np.array([[-128, 127, 0]], dtype=np.int8),
        "i16": np.array([[-32768, 32767], [5, -6]], dtype=np.int16),
        "i64": np.array([[-(2**53), 2**53, 42]], dtype=np.int64),
        "u16": np.array([[0, 65535, 9]], dtype=np.uint16),
        "u32": np.array([[0, 4294967295], [1, 2]], dtype=np.uint32),
        "u64": np.array([[0, 2**53, 5]], dtype=np.uint64),
        "sp": sp,
        "splog": splog,
        "cube": np.arange(2 * 3 * 4, dtype=np.float64).reshape(2, 3, 4) * 0.5 - 3.0,
        "rowvec": np.array([1.5, -2.0, 3.25, 0.0]),
    }


def write_mat():
    variables = mat_numeric()
    for file, compress in (("numeric_v5.mat", False), ("numeric_v5_compressed.mat", True)):
        scipy.io.savemat(OUT / file, variables, format="5", do_compression=compress)
        back = scipy.io.loadmat(OUT / file, mat_dtype=True)
        for key, a in variables.items():
            sparse = scipy.sparse.issparse(a)
            dense = a.toarray() if sparse else np.asarray(a)
            if key == "rowvec":
                dense = dense.reshape(1, -1)  # savemat's default oned_as='row'
            got = back[key].toarray() if sparse else back[key]
            np.testing.assert_array_equal(got, dense)
            assert got.shape == dense.shape
            record(file, key, dense, sparse=sparse)

    col = np.array([0.25, -1.0, 8.0])
    scipy.io.savemat(OUT / "column_vector.mat", {"colvec": col}, format="5", oned_as="column")
    assert scipy.io.loadmat(OUT / "column_vector.mat")["colvec"].shape == (3, 1)
    record("column_vector.mat", "colvec", col.reshape(3, 1))

    # A numeric variable alongside a cell array, a char array and a struct.
    names = np.empty((1, 3), dtype=object)
    names[0, 0], names[0, 1], names[0, 2] = "left", "right", "both"
    info = {"site": "invented", "n": 3.0}
    weights = np.array([[0.0, 1.5, 2.0], [1.5, 0.0, 0.5], [2.0, 0.5, 0.0]])
    scipy.io.savemat(
        OUT / "mixed.mat",
        {"W": weights, "names": names, "label": "invented demo", "info": info},
        format="5",
        do_compression=True,
    )
    record("mixed.mat", "W", weights)

    # A realistic connectome: 84 regions, symmetric streamline counts (int32),
    # zero diagonal, sparse-ish heavy-tailed weights. Invented.
    n = 84
    upper = np.triu(RNG.negative_binomial(1, 0.02, size=(n, n)) * (RNG.random((n, n)) < 0.4), 1)
    sc = (upper + upper.T).astype(np.int32)
    scipy.io.savemat(OUT / "connectome_84.mat", {"SC": sc}, format="5", do_compression=True)
    record("connectome_84.mat", "SC", sc)


# --- hand-built level-5 files ---------------------------------------------------

MI = {"int8": 1, "uint8": 2, "int16": 3, "uint16": 4, "int32": 5, "uint32": 6, "single": 7, "double": 9,
      "int64": 12, "uint64": 13, "matrix": 14, "compressed": 15}
MX = {"sparse": 5, "double": 6, "single": 7, "int8": 8, "uint8": 9, "int16": 10, "uint16": 11, "int32": 12,
      "uint32": 13, "int64": 14, "uint64": 15}
FMT = {"int8": "b", "uint8": "B", "int16": "h", "uint16": "H", "int32": "i", "uint32": "I", "single": "f",
       "double": "d", "int64": "q", "uint64": "Q"}


def element(e, mi, values, small=True):
    """One data element: 8-byte tag + data padded to 8, or the small format."""
    payload = struct.pack(e + FMT[mi] * len(values), *values) if values is not None else b""
    n = len(payload)
    if small and n <= 4:
        # Small data element: bytes in the upper 16 bits of the first word,
        # type in the lower 16, data in the second word.
        return struct.pack(e + "I", (n << 16) | MI[mi]) + payload + b"\0" * (4 - n)
    return struct.pack(e + "II", MI[mi], n) + payload + b"\0" * (-n % 8)


def matrix(e, name, mx, dims, parts, *, logical=False, complex_=False, nzmax=0):
    flags = MX[mx] | ((0x02 if logical else 0) | (0x08 if complex_ else 0)) << 8
    body = element(e, "uint32", [flags, nzmax], small=False)
    body += element(e, "int32", dims, small=False)
    body += element(e, "int8", list(name.encode()))
    for mi, values in parts:
        body += element(e, mi, values)
    return struct.pack(e + "II", MI["matrix"], len(body)) + body


def header(e):
    text = b"MATLAB 5.0 MAT-file, hand-built by hierax tests/reference/make_array_fixtures.py"
    return text.ljust(116, b" ") + b"\0" * 8 + struct.pack(e + "H", 0x0100) + (b"IM" if e == "<" else b"MI")


def handmade_variables(e):
    """(name, element bytes, expected dense array, numpy dtype name, sparse)."""
    out = []
    # double class, data stored as miUINT8 (MATLAB does this for small integers).
    a = np.array([[1.0, 2.0, 3.0], [250.0, 0.0, 9.0]])
    out.append(("dbl_u8", matrix(e, "dbl_u8", "double", [2, 3], [("uint8", a.ravel("F").astype(int).tolist())]),
                a, "float64", False))
    # double class scalar in the small data element format (1 byte of int8 data).
    out.append(("s", matrix(e, "s", "double", [1, 1], [("int8", [-7])]), np.array([[-7.0]]), "float64", False))
    # double class with miINT16 data, negative values.
    a = np.array([[-300.0, 12.0], [7.0, -1.0]])
    out.append(("dbl_i16", matrix(e, "dbl_i16", "double", [2, 2], [("int16", a.ravel("F").astype(int).tolist())]),
                a, "float64", False))
    # int32 class with miINT16 data.
    a = np.array([[-20000, 5, 6]], dtype=np.int32)
    out.append(("i32_i16", matrix(e, "i32_i16", "int32", [1, 3], [("int16", a.ravel("F").tolist())]), a, "int32", False))
    # single class with miSINGLE data, 3-D.
    a = (np.arange(12, dtype=np.float32).reshape(3, 2, 2) / 4).astype(np.float32)
    out.append(("cube32", matrix(e, "cube32", "single", [3, 2, 2], [("single", a.ravel("F").tolist())]),
                a, "float32", False))
    # logical (uint8 class + logical flag), small data element (4 values).
    a = np.array([[True, False], [True, True]])
    out.append(("flags", matrix(e, "flags", "uint8", [2, 2], [("uint8", a.ravel("F").astype(int).tolist())],
                                logical=True), a, "bool", False))
    # logical sparse 3x4, ir/jc int32, pr uint8.
    dense = np.array([[False, True, False, False], [True, False, False, True], [False, True, False, False]])
    csc = scipy.sparse.csc_matrix(dense)
    parts = [("int32", csc.indices.tolist()), ("int32", csc.indptr.tolist()), ("uint8", [1] * csc.nnz)]
    out.append(("splog", matrix(e, "splog", "sparse", [3, 4], parts, logical=True, nzmax=csc.nnz),
                dense, "bool", True))
    # double sparse 4x3 with miUINT8 values and nzmax larger than the count.
    dense = np.array([[0.0, 3.0, 0.0], [5.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 200.0, 1.0]])
    csc = scipy.sparse.csc_matrix(dense)
    ir = csc.indices.tolist() + [0, 0]
    parts = [("int32", ir), ("int32", csc.indptr.tolist()), ("uint8", csc.data.astype(int).tolist())]
    out.append(("spdbl", matrix(e, "spdbl", "sparse", [4, 3], parts, nzmax=len(ir)), dense, "float64", True))
    # complex double (the reader refuses it; no expected values).
    out.append(("z", matrix(e, "z", "double", [1, 2], [("double", [1.0, 2.0]), ("double", [0.5, -0.5])],
                            complex_=True), None, None, False))
    return out


def write_handmade():
    for file, e, compress in (("handmade_be.mat", ">", False), ("handmade_le_compressed.mat", "<", True)):
        blob = header(e)
        variables = handmade_variables(e)
        for _, elem, _, _, _ in variables:
            if compress:
                z = zlib.compress(elem)
                blob += struct.pack(e + "II", MI["compressed"], len(z)) + z
            else:
                blob += elem
        (OUT / file).write_bytes(blob)
        # Independent check: scipy reads the hand-built bytes as intended.
        real = [name for name, _, dense, _, _ in variables if dense is not None]
        back = scipy.io.loadmat(OUT / file, mat_dtype=True, variable_names=real)
        for name, _, dense, dtype, sparse in variables:
            if dense is None:
                # mat_dtype=True casts to the class dtype; read this one as stored.
                z = scipy.io.loadmat(OUT / file, variable_names=[name])[name]
                np.testing.assert_array_equal(z, np.array([[1.0 + 0.5j, 2.0 - 0.5j]]))
                continue
            got = back[name]
            got = got.toarray() if scipy.sparse.issparse(got) else got
            np.testing.assert_array_equal(got, dense)
            assert got.shape == dense.shape, (name, got.shape)
            record(file, name, dense, sparse=sparse, dtype=dtype)


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    write_npy()
    write_npz()
    write_mat()
    write_handmade()
    doc = {
        "generator": "tests/reference/make_array_fixtures.py",
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "comparison": "exact: values are float64 strings (repr round-trips; 0x... is the bit pattern)",
        "fixtures": expected,
    }
    (OUT / "expected.json").write_text(json.dumps(doc, indent=1) + "\n")
    print(f"wrote {len(expected)} expected arrays to {OUT}")


if __name__ == "__main__":
    main()
