#!/usr/bin/python3
"""Make tensor/testdata/hosvd_numpy.json: small 3-way tensors, the singular values of
their unfoldings and truncated-HOSVD errors, all computed with NumPy (Debian 12's
python3-numpy 1.24) as an outside reference for the Go tensor package.

Run from the repository root:  /usr/bin/python3 scripts/make_tensor_fixtures.py

With --stdin it instead reads {"cases": [{"name", "shape", "data", "truncations":
[{"ranks"}]}]} from standard input and writes the same cases with the NumPy values
filled in to standard output: the live cross-check of tensor/live_test.go
(TRIPASS_LIVE_NUMPY=1 go test ./tensor -run Live).

Each case holds "shape" [I, J, K], "data" in the Go layout (element (i, j, k) at
i + I*(j + J*k), i.e. NumPy's Fortran order of an (I, J, K) array), the n-mode singular
values per mode (numpy.linalg.svd of the mode-n unfolding; the column order of the
unfolding does not change them), and truncations: for given multilinear ranks, the
relative Frobenius error of the truncated HOSVD (factors = leading left singular
vectors of each unfolding, core = projection, reconstruction by einsum).
"""
import json
import os
import sys

import numpy as np


def unfold(a, n):
    return np.moveaxis(a, n, 0).reshape(a.shape[n], -1)


def mode_values(a):
    return [np.linalg.svd(unfold(a, n), compute_uv=False).tolist() for n in range(3)]


def truncated_hosvd_error(a, ranks):
    us = [np.linalg.svd(unfold(a, n), full_matrices=False)[0][:, :ranks[n]] for n in range(3)]
    core = np.einsum("ijk,ia,jb,kc->abc", a, us[0], us[1], us[2])
    approx = np.einsum("abc,ia,jb,kc->ijk", core, us[0], us[1], us[2])
    return float(np.linalg.norm(a - approx) / np.linalg.norm(a))


def case(name, a, truncations):
    return {
        "name": name,
        "shape": list(a.shape),
        "data": a.flatten(order="F").tolist(),
        "mode_singular_values": mode_values(a),
        "truncations": [{"ranks": list(r), "rel_error": truncated_hosvd_error(a, r)} for r in truncations],
    }


def answer_stdin():
    req = json.load(sys.stdin)
    out = []
    for c in req["cases"]:
        a = np.array(c["data"], dtype=np.float64).reshape(c["shape"], order="F")
        out.append(case(c["name"], a, [tuple(t["ranks"]) for t in c.get("truncations", [])]))
    json.dump({"generator": "scripts/make_tensor_fixtures.py --stdin, NumPy %s" % np.__version__, "cases": out},
              sys.stdout)


def main():
    if "--stdin" in sys.argv[1:]:
        answer_stdin()
        return
    rng = np.random.default_rng(20261202)
    cases = []
    cases.append(case("random 5x4x3", rng.standard_normal((5, 4, 3)), [(3, 2, 2), (1, 1, 1), (4, 3, 2)]))
    cases.append(case("random 7x7x7", rng.standard_normal((7, 7, 7)), [(5, 5, 5), (2, 3, 4), (7, 7, 1)]))
    cases.append(case("random 9x5x3", rng.standard_normal((9, 5, 3)), [(4, 4, 2), (9, 5, 3)]))
    # A planted sum of two rank-one terms: multilinear rank (2, 2, 2), the rest zeros.
    a = sum(np.einsum("i,j,k->ijk", rng.standard_normal(6), rng.standard_normal(5), rng.standard_normal(4))
            for _ in range(2))
    cases.append(case("rank-two 6x5x4", a, [(2, 2, 2), (1, 2, 2)]))
    # A graded tensor whose spectra decay by decades in every mode.
    g = rng.standard_normal((6, 6, 6)) * np.einsum("i,j,k->ijk", *(10.0 ** -np.arange(6.0),) * 3)
    cases.append(case("graded 6x6x6", g, [(3, 3, 3), (2, 4, 6)]))
    cases.append(case("flat 6x5x1", rng.standard_normal((6, 5, 1)), [(3, 3, 1)]))
    cases.append(case("line 7x1x1", rng.standard_normal((7, 1, 1)), [(1, 1, 1)]))
    out = {
        "generator": "scripts/make_tensor_fixtures.py, NumPy %s" % np.__version__,
        "cases": cases,
    }
    path = os.path.join(os.path.dirname(__file__), "..", "tensor", "testdata", "hosvd_numpy.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
