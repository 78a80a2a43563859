#!/usr/bin/env python3
"""HDF5 reference fixtures for hierax's HDF5 reader and writer.

Run with the pinned reference environment (h5py 3.12.1 on HDF5 1.14.4,
numpy 2.1.3):

    .venv-ref/bin/python tests/reference/make_h5_fixtures.py

Two jobs, both writing into tests/data/h5/:

1. ``fixtures``: write HDF5 files with h5py in the layouts other tools
   produce (default settings, libver v108/v110/v112/v114, chunked with gzip
   and shuffle, nested groups, attributes of every kind, several element
   types, a MATLAB v7.3-like file, one chunked file with libver="latest"), and
   record every numeric dataset in expected.json. Floats are recorded as the
   hex bit pattern of their float64 value, so the Rust test compares bit for
   bit without trusting any decimal parser.
2. ``readback``: open written_by_hierax.h5 and written_by_hierax_v18.h5
   (made by ``cargo run --example write_h5_sample``) with h5py, read every
   dataset and attribute, and record what h5py saw in h5py_readback.json and
   h5py_readback_v18.json.

With no argument both run (readback only for the files that exist).
All data are invented (seeded numpy generator); nothing comes from a study.
"""

import json
import struct
import sys
from pathlib import Path

import h5py
import numpy as np

OUT = Path(__file__).resolve().parent.parent / "data" / "h5"
SEED = 20261201


def f64_bits(values):
    """Hex bit patterns of values converted to float64 (exact for f32 and ints < 2^53)."""
    arr = np.asarray(values, dtype=np.float64).ravel(order="C")
    return ["%016x" % struct.unpack("<Q", struct.pack("<d", float(v)))[0] for v in arr]


def record(expected, file, path, logical, stored, *, spec=None, sparse=False, note=None):
    """Record one dataset as the user should see it (logical row-major order)."""
    logical = np.asarray(logical)
    entry = {
        "file": file,
        "spec": spec if spec is not None else f"{file}:{path}",
        "shape": list(logical.shape),
        "stored": stored,
        "sparse": sparse,
        "bits": f64_bits(logical),
    }
    if note:
        entry["note"] = note
    expected["datasets"].append(entry)


def special_floats(rng, shape):
    """Random float64 values plus the awkward ones: -0.0, NaN, +-inf, subnormal, extremes."""
    a = rng.standard_normal(shape)
    flat = a.reshape(-1)
    specials = [-0.0, np.nan, np.inf, -np.inf, 5e-324, np.finfo(np.float64).max, 0.1 + 0.2]
    flat[: len(specials)] = specials
    return a


def write_common(f, rng, name_prefix=""):
    """The numeric datasets every libver file holds."""
    m = special_floats(rng, (5, 7))
    f.create_dataset("matrix_f64", data=m)
    c = rng.standard_normal((40, 6))
    f.create_dataset("chunked_gzip", data=c, chunks=(8, 3), compression="gzip", compression_opts=4, shuffle=True)
    # One unlimited dimension: an extensible-array chunk index from libver v110 on.
    r = rng.standard_normal((13, 6))
    f.create_dataset("resizable", data=r, chunks=(4, 6), maxshape=(None, 6), compression="gzip")
    return m, c, r


def fixtures():
    OUT.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    expected = {
        "generator": "tests/reference/make_h5_fixtures.py",
        "h5py": h5py.__version__,
        "hdf5": h5py.version.hdf5_version,
        "numpy": np.__version__,
        "seed": SEED,
        "datasets": [],
        "latest_chunked": {},
        "single": {},
    }

    # 1. Default settings: several element types, nested groups, attributes.
    name = "default.h5"
    with h5py.File(OUT / name, "w") as f:
        m, c, r = write_common(f, rng)
        record(expected, name, "/matrix_f64", m, "float64")
        record(expected, name, "/chunked_gzip", c, "float64")
        record(expected, name, "/resizable", r, "float64")
        f32 = rng.standard_normal((3, 4)).astype(np.float32)
        f32.reshape(-1)[0] = np.float32(1e-45)  # f32 subnormal
        f.create_dataset("types/f32", data=f32)
        record(expected, name, "/types/f32", f32, "float32")
        i32 = rng.integers(-(2**31), 2**31, size=(4, 3), dtype=np.int32)
        f.create_dataset("types/i32", data=i32)
        record(expected, name, "/types/i32", i32, "int32")
        i64 = rng.integers(-(2**53), 2**53, size=(6,), dtype=np.int64)
        f.create_dataset("types/i64", data=i64)
        record(expected, name, "/types/i64", i64, "int64")
        u8 = rng.integers(0, 256, size=(2, 2, 3), dtype=np.uint8)
        f.create_dataset("types/u8", data=u8)
        record(expected, name, "/types/u8", u8, "uint8")
        b = np.array([True, False, True, True])
        f.create_dataset("types/bool", data=b)
        record(expected, name, "/types/bool", b, "bool")
        s = f.create_dataset("scalar", data=np.float64(2.5))
        record(expected, name, "/scalar", np.float64(2.5), "float64")
        deep = rng.standard_normal((2, 3))
        f.create_dataset("a/b/c/deep", data=deep)
        record(expected, name, "/a/b/c/deep", deep, "float64")
        f.create_dataset("labels", data=np.array(["alpha", "beta"], dtype=h5py.string_dtype()))
        # Attributes of every kind h5py writes by default.
        for obj in (f, s, f["a/b"]):
            obj.attrs["int"] = np.int64(-7)
            obj.attrs["float"] = np.float64(0.1)
            obj.attrs["vlen_str"] = "text é"
            obj.attrs["fixed_str"] = np.bytes_("fixed")
            obj.attrs["f64_array"] = np.array([1.5, -2.25, 1e300])
            obj.attrs["i32_array"] = np.array([1, -2, 3], dtype=np.int32)
            obj.attrs["str_array"] = np.array(["x", "yz"], dtype=h5py.string_dtype())
    expected["attributes"] = {
        "file": name,
        "objects": ["/", "/scalar", "/a/b"],
        "int": -7,
        "float_bits": f64_bits([0.1])[0],
        "vlen_str": "text é",
        "fixed_str": "fixed",
        "f64_array_bits": f64_bits([1.5, -2.25, 1e300]),
        "i32_array": [1, -2, 3],
        "str_array": ["x", "yz"],
    }

    # 2. The same content at each explicit libver bound.
    for lv in ("v108", "v110", "v112", "v114"):
        name = f"libver_{lv}.h5"
        with h5py.File(OUT / name, "w", libver=(lv, lv)) as f:
            m, c, r = write_common(f, rng)
        record(expected, name, "/matrix_f64", m, "float64")
        record(expected, name, "/chunked_gzip", c, "float64")
        record(expected, name, "/resizable", r, "float64")

    # 3. Chunked + gzip + shuffle of several types, uneven edge chunks, default libver.
    name = "chunked_filters.h5"
    with h5py.File(OUT / name, "w") as f:
        big = rng.standard_normal((101, 13))
        f.create_dataset("f64", data=big, chunks=(16, 5), compression="gzip", compression_opts=9, shuffle=True)
        record(expected, name, "/f64", big, "float64")
        i32 = rng.integers(-1000, 1000, size=(37,), dtype=np.int32)
        f.create_dataset("i32", data=i32, chunks=(10,), compression="gzip", shuffle=True)
        record(expected, name, "/i32", i32, "int32")
        f32 = rng.standard_normal((9, 9)).astype(np.float32)
        f.create_dataset("grp/f32", data=f32, chunks=(4, 4), compression="gzip")
        record(expected, name, "/grp/f32", f32, "float32")

    # 4. One numeric dataset only (key may be left out), next to a string dataset.
    name = "single.h5"
    with h5py.File(OUT / name, "w") as f:
        v = rng.standard_normal(11)
        f.create_dataset("maps/myelin", data=v)
        f.create_dataset("maps/names", data=np.array(["r%d" % i for i in range(11)], dtype=h5py.string_dtype()))
    record(expected, name, "/maps/myelin", v, "float64", spec=name)

    # 5. MATLAB v7.3-like file: 512-byte user block with the text header,
    #    MATLAB_class attributes, column-major storage (the HDF5 dataset is the
    #    transpose of the MATLAB array), a sparse matrix as a data/ir/jc group.
    name = "matlab_v73.mat"
    sc = rng.standard_normal((3, 4))  # MATLAB: 3 rows x 4 columns
    ints = rng.integers(-100, 100, size=(2, 5), dtype=np.int32)
    col = rng.standard_normal((6, 1))  # MATLAB column vector 6x1
    dense = np.zeros((4, 3))
    dense[0, 0], dense[2, 0], dense[1, 2], dense[3, 2] = 1.5, -2.0, 3.25, 4.0
    mask = np.array([[True, False, False, True]])
    field = np.array([[1.0, 2.0], [3.0, 4.0]])
    with h5py.File(OUT / name, "w", userblock_size=512, libver="earliest") as f:
        for var, arr, cls in (("SC", sc, "double"), ("counts", ints, "int32"), ("tau", col, "double")):
            d = f.create_dataset(var, data=np.ascontiguousarray(arr.T))
            d.attrs["MATLAB_class"] = np.bytes_(cls)
        # CSC of `dense` (4x3): column pointers jc, 0-based row indices ir.
        g = f.create_group("W")
        g.attrs["MATLAB_class"] = np.bytes_("double")
        g.attrs["MATLAB_sparse"] = np.uint64(dense.shape[0])
        rows, cols = np.nonzero(dense.T)  # column-major order of nonzeros
        ir = cols.astype(np.uint64)
        data = dense.T[rows, cols]
        jc = np.zeros(dense.shape[1] + 1, dtype=np.uint64)
        for j in range(dense.shape[1]):
            jc[j + 1] = jc[j] + np.count_nonzero(dense[:, j])
        g.create_dataset("data", data=data)
        g.create_dataset("ir", data=ir)
        g.create_dataset("jc", data=jc)
        # logical 1x4 row (uint8), char 'abc' (uint16 codes), a struct with a
        # 2x2 field, and an empty double (MATLAB stores its dims as data).
        d = f.create_dataset("mask", data=mask.T.astype(np.uint8))
        d.attrs["MATLAB_class"] = np.bytes_("logical")
        d.attrs["MATLAB_int_decode"] = np.int32(1)
        d = f.create_dataset("name", data=np.array([[ord(c)] for c in "abc"], dtype=np.uint16))
        d.attrs["MATLAB_class"] = np.bytes_("char")
        d.attrs["MATLAB_int_decode"] = np.int32(2)
        st = f.create_group("s")
        st.attrs["MATLAB_class"] = np.bytes_("struct")
        d = st.create_dataset("x", data=np.ascontiguousarray(field.T))
        d.attrs["MATLAB_class"] = np.bytes_("double")
        d = f.create_dataset("e", data=np.array([0, 0], dtype=np.uint64))
        d.attrs["MATLAB_class"] = np.bytes_("double")
        d.attrs["MATLAB_empty"] = np.uint8(1)
    header = b"MATLAB 7.3 MAT-file, Platform: GLNXA64, Created on: Tue Dec  1 00:00:00 2026 HDF5 schema 1.00 ."
    block = bytearray(512)
    block[: len(header)] = header
    block[len(header) : 116] = b" " * (116 - len(header))
    block[116:124] = b"\x00" * 8  # subsystem data offset: none
    block[124:126] = b"\x00\x02"  # version 0x0200
    block[126:128] = b"IM"  # endian indicator
    with open(OUT / name, "r+b") as fh:
        fh.write(bytes(block))
    record(expected, name, "SC", sc, "float64")
    record(expected, name, "counts", ints, "int32")
    record(expected, name, "tau", col, "float64")
    record(expected, name, "W", dense, "float64", sparse=True)
    record(expected, name, "mask", mask, "bool")
    record(expected, name, "s/x", field, "float64")

    # 6. libver="latest": a chunked dataset with two unlimited dimensions gets
    #    a version-2 B-tree chunk index, which hdf5-pure 0.47.0 cannot read.
    #    The other layouts in the same file (fixed shape: fixed-array index;
    #    one unlimited dimension: extensible array; contiguous) read fine.
    name = "latest_chunked.h5"
    with h5py.File(OUT / name, "w", libver="latest") as f:
        x = rng.standard_normal((20, 4))
        f.create_dataset("x", data=x, chunks=(5, 4), maxshape=(None, None), compression="gzip", shuffle=True)
        y = rng.standard_normal((20, 4))
        f.create_dataset("y_contiguous", data=y)
        z = rng.standard_normal((20, 4))
        f.create_dataset("z_fixed_chunked", data=z, chunks=(5, 4), compression="gzip", shuffle=True)
        w = rng.standard_normal((20, 4))
        f.create_dataset("w_one_unlimited", data=w, chunks=(5, 4), maxshape=(None, 4), compression="gzip")
    record(expected, name, "/y_contiguous", y, "float64")
    record(expected, name, "/z_fixed_chunked", z, "float64")
    record(expected, name, "/w_one_unlimited", w, "float64")
    expected["latest_chunked"] = {"file": name, "spec": f"{name}:/x", "bits": f64_bits(x), "shape": [20, 4]}

    with open(OUT / "expected.json", "w") as fh:
        json.dump(expected, fh, indent=1, ensure_ascii=False)
        fh.write("\n")


def describe_attr(v):
    """What h5py handed back for an attribute: Python/numpy type and value."""
    if isinstance(v, str):
        return {"py": "str", "value": v}
    if isinstance(v, bytes):
        return {"py": "bytes", "value": v.decode("latin-1")}
    if isinstance(v, np.ndarray):
        if v.dtype.kind == "O":
            return {"py": "ndarray[object]", "value": [x if isinstance(x, str) else repr(x) for x in v.tolist()]}
        if v.dtype.kind == "f":
            return {"py": f"ndarray[{v.dtype}]", "bits": f64_bits(v)}
        if v.dtype.kind in "iu":
            return {"py": f"ndarray[{v.dtype}]", "value": [int(x) for x in v.ravel()]}
        return {"py": f"ndarray[{v.dtype}]", "value": repr(v.tolist())}
    if isinstance(v, np.floating):
        return {"py": type(v).__name__, "bits": f64_bits([v])[0]}
    if isinstance(v, np.integer):
        return {"py": type(v).__name__, "value": int(v)}
    return {"py": type(v).__name__, "value": repr(v)}


def readback(stem):
    path = OUT / f"{stem}.h5"
    objects = []

    def visit(name, obj):
        entry = {"path": "/" + name if name else "/", "attrs": {k: describe_attr(obj.attrs[k]) for k in sorted(obj.attrs)}}
        if isinstance(obj, h5py.Dataset):
            entry["kind"] = "dataset"
            entry["shape"] = list(obj.shape)
            entry["dtype"] = str(obj.dtype)
            entry["compression"] = obj.compression
            sd = h5py.check_string_dtype(obj.dtype)
            if sd is not None:
                entry["string_encoding"] = sd.encoding
                entry["string_length"] = sd.length
                vals = obj.asstr()[()]
                entry["values"] = [vals] if isinstance(vals, str) else list(np.asarray(vals).ravel())
            elif obj.dtype.kind == "f":
                entry["bits"] = f64_bits(obj[()])
            else:
                entry["values"] = [int(x) for x in np.asarray(obj[()]).ravel()]
        else:
            entry["kind"] = "group"
        objects.append(entry)

    with h5py.File(path, "r") as f:
        superblock = f.id.get_create_plist().get_version()[0]
        visit("", f)
        f.visititems(visit)
    objects.sort(key=lambda e: e["path"])
    out = {
        "generator": "tests/reference/make_h5_fixtures.py readback",
        "h5py": h5py.__version__,
        "hdf5": h5py.version.hdf5_version,
        "file": path.name,
        "superblock_version": superblock,
        "objects": objects,
    }
    suffix = stem.removeprefix("written_by_hierax")
    with open(OUT / f"h5py_readback{suffix}.json", "w") as fh:
        json.dump(out, fh, indent=1, ensure_ascii=False)
        fh.write("\n")


if __name__ == "__main__":
    jobs = sys.argv[1:] or ["fixtures", "readback"]
    if "fixtures" in jobs:
        fixtures()
    if "readback" in jobs:
        for stem in ("written_by_hierax", "written_by_hierax_v18"):
            if (OUT / f"{stem}.h5").exists():
                readback(stem)
            elif sys.argv[1:]:
                sys.exit(f"tests/data/h5/{stem}.h5 is missing: run `cargo run --example write_h5_sample` first")
