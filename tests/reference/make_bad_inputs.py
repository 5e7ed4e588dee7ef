#!/usr/bin/python3
"""Files for the bad-input catalogue (tests/bad_input_test.cpp) that NumPy itself must write.

Tool: NumPy (numpy.savez, numpy.savez_compressed, numpy.asfortranarray, dtype '>f8'/'>i8').

tests/fixtures/bad/
  data_truncated_compressed.npz   numpy.savez_compressed of x (40 x 3) and y (40,), cut to
                                  its first half: a deflated archive without its directory.
  layout/<variant>/               one small run (run.json, data.npz, snapshots/step-{0,10,20}.npz)
                                  whose arrays hold the same values in every variant:
                                    c_order             C order, little-endian (the reference)
                                    fortran             every 2-D array stored column-major
                                    big_endian          every array '>f8' ('>i8' for none here)
                                    fortran_big_endian  both at once
                                  The contract (run-format.md, section 1) says all four read alike,
                                  so `plaudit audit` must print the same report for each.

Run: /usr/bin/python3 tests/reference/make_bad_inputs.py
"""
import json
import pathlib
import shutil

import numpy as np

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "bad"

ROWS, DIM, WIDTH = 40, 3, 5

MANIFEST = {
    "format": "plaudit-run/1",
    "parameterization": "standard",
    "loss": "squared",
    "weight_layout": "out_in",
    "layers": [
        {"weight": "fc1.weight", "bias": "fc1.bias", "activation": "tanh"},
        {"weight": "head.weight", "activation": "identity"},
    ],
    "data": "data.npz",
    "notes": "array-layout fixture: same values in every variant",
}


def layout_arrays():
    """Data from a tanh teacher and three snapshots drifting towards it."""
    rng = np.random.default_rng(20240807)
    x = rng.normal(size=(ROWS, DIM))
    teacher_w = rng.normal(size=(WIDTH, DIM)) / np.sqrt(DIM)
    teacher_a = rng.normal(size=(1, WIDTH)) / np.sqrt(WIDTH)
    y = (np.tanh(x @ teacher_w.T) @ teacher_a.T).reshape(ROWS)
    w0 = rng.normal(size=(WIDTH, DIM)) / np.sqrt(DIM)
    b0 = np.zeros(WIDTH)
    a0 = rng.normal(size=(1, WIDTH)) / np.sqrt(WIDTH)
    snaps = {}
    for step, t in ((0, 0.0), (10, 0.5), (20, 0.8)):
        snaps[step] = {
            "fc1.weight": (1 - t) * w0 + t * teacher_w,
            "fc1.bias": b0 + 0.01 * t,
            "head.weight": (1 - t) * a0 + t * teacher_a,
        }
    return {"x": x, "y": y}, snaps


def transform(a, fortran, big_endian):
    if big_endian:
        a = a.astype(a.dtype.newbyteorder(">"))
    if fortran and a.ndim >= 2:
        a = np.asfortranarray(a)
        # A (1, n) array is both C and Fortran contiguous, and NumPy stores it as C order.
        assert a.flags.f_contiguous and (min(a.shape) == 1 or not a.flags.c_contiguous)
    return a


def write_layout_run(root, data, snaps, fortran, big_endian):
    (root / "snapshots").mkdir(parents=True)
    (root / "run.json").write_text(json.dumps(MANIFEST, indent=2) + "\n")
    np.savez(root / "data.npz", **{k: transform(v, fortran, big_endian) for k, v in data.items()})
    for step, arrays in snaps.items():
        np.savez(root / "snapshots" / f"step-{step}.npz",
                 **{k: transform(v, fortran, big_endian) for k, v in arrays.items()})
    # What NumPy reads back must be the reference values, whatever the layout on disk.
    with np.load(root / "data.npz") as back:
        for k, v in data.items():
            assert back[k].dtype.byteorder in (">" if big_endian else "<=|")
            assert np.array_equal(back[k], v)
        if fortran:
            assert back["x"].flags.f_contiguous and not back["x"].flags.c_contiguous


def main():
    if OUT.exists():
        shutil.rmtree(OUT)
    OUT.mkdir(parents=True)

    rng = np.random.default_rng(11)
    whole = OUT / "data_truncated_compressed.npz"
    np.savez_compressed(whole, x=rng.normal(size=(ROWS, DIM)), y=rng.normal(size=ROWS))
    raw = whole.read_bytes()
    whole.write_bytes(raw[: len(raw) // 2])

    data, snaps = layout_arrays()
    for name, fortran, big_endian in (("c_order", False, False), ("fortran", True, False),
                                      ("big_endian", False, True), ("fortran_big_endian", True, True)):
        write_layout_run(OUT / "layout" / name, data, snaps, fortran, big_endian)

    files = [p for p in OUT.rglob("*") if p.is_file()]
    print(f"wrote {len(files)} files, {sum(p.stat().st_size for p in files)} bytes, to {OUT}")


if __name__ == "__main__":
    main()
