#!/usr/bin/env python3
"""Time reference sparse direct solvers on the Matrix Market systems written by rillnet.

`examples/large_solve.rs` writes each Kirchhoff system it times as NAME.mtx (symmetric,
lower triangle, coordinate format) and NAME_b.mtx (the right-hand side, array format). This
script reads those files and times two established solvers on exactly the same systems:

- SuiteSparse CHOLMOD through its C library (ctypes, no compiled binding needed): symbolic
  analysis with the AMD ordering only (`nmethods = 1`, no METIS fallback), numeric
  factorisation, one solve; the three phases are timed separately. The factor kind is
  CHOLMOD's own default choice (`--cholmod-mode auto`: supernodal LL' when the flop count per
  factor entry is 40 or more, as on grids; simplicial LDL' otherwise, as on trees and ladders,
  where forcing supernodal made the factor about 3-8x slower at 10^6 unknowns);
  `--cholmod-mode supernodal` forces it. The kind used is printed.
- SuperLU as shipped with SciPy (`scipy.sparse.linalg.splu`) on the full symmetric matrix,
  column ordering MMD_AT_PLUS_A (minimum degree on A'+A, the choice for a symmetric
  pattern); `splu` includes its analysis, so its analysis and factorisation are one figure.

Each figure is the median of `--runs` runs (wall time, time.perf_counter; the process CPU time
of the three phases, time.process_time, is printed beside the total). Each solver's relative
residual ||b - A x||_inf / (||A||_inf ||x||_inf + ||b||_inf) is printed next to its times,
so that every figure belongs to a correct solve.

Run:
    python3 examples/reference_solvers.py DIR [--runs 5] [--json]   # every DIR/NAME.mtx
    python3 examples/reference_solvers.py DIR/tree.mtx DIR/grid.mtx
    cargo run --release --example large_solve -- --reference   # writes, then calls this

Needs `pip install numpy scipy`. CHOLMOD needs the shared library libcholmod (Debian/Ubuntu:
`apt-get install libsuitesparse-dev` or `libcholmod3`). The struct layouts here were checked
against CHOLMOD 3.0 (SuiteSparse 5.x); with any library, the defaults set by cholmod_start must
read back at the expected places or CHOLMOD is not used. `--libcholmod PATH` picks a library. Without
numpy/scipy the script prints why and exits 0, so a benchmark on a fresh machine does not
fail; without CHOLMOD it prints "CHOLMOD not available: <reason>" and times SuperLU alone.

The BLAS threads are limited to one (OMP/OPENBLAS/MKL_NUM_THREADS=1 unless already set) so
the figures are one core, as rillnet's. CHOLMOD's supernodal factorisation spends its time in
dense BLAS kernels: its speed depends on the BLAS the library is linked with (reported).
"""

import argparse
import os
import statistics
import sys
import time

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import ctypes  # noqa: E402
import ctypes.util  # noqa: E402

# CHOLMOD constants (cholmod_core.h / cholmod.h).
CHOLMOD_REAL = 1
CHOLMOD_INT = 0
CHOLMOD_DOUBLE = 0
CHOLMOD_SUPERNODAL = 2
CHOLMOD_SIMPLICIAL = 0
CHOLMOD_AUTO = 1
CHOLMOD_AMD = 2
CHOLMOD_A = 0
CHOLMOD_MAXMETHODS = 9
ORDERINGS = {0: "natural", 1: "given", 2: "AMD", 3: "METIS", 4: "NESDIS", 5: "COLAMD",
             6: "postordered"}

size_t = ctypes.c_size_t
c_int = ctypes.c_int
c_double = ctypes.c_double
c_void_p = ctypes.c_void_p


class _Method(ctypes.Structure):
    _fields_ = [("lnz", c_double), ("fl", c_double), ("prune_dense", c_double),
                ("prune_dense2", c_double), ("nd_oksep", c_double),
                ("other_1", c_double * 4), ("nd_small", size_t), ("other_2", size_t * 4),
                ("aggressive", c_int), ("order_for_lu", c_int), ("nd_compress", c_int),
                ("nd_camd", c_int), ("nd_components", c_int), ("ordering", c_int),
                ("other_3", size_t * 4)]


class _CommonHead(ctypes.Structure):
    """The leading fields of cholmod_common, up to `postorder` (the only ones touched)."""
    _fields_ = [("dbound", c_double), ("grow0", c_double), ("grow1", c_double),
                ("grow2", size_t), ("maxrank", size_t), ("supernodal_switch", c_double),
                ("supernodal", c_int), ("final_asis", c_int), ("final_super", c_int),
                ("final_ll", c_int), ("final_pack", c_int), ("final_monotonic", c_int),
                ("final_resymbol", c_int), ("zrelax", c_double * 3), ("nrelax", size_t * 3),
                ("prefer_zomplex", c_int), ("prefer_upper", c_int),
                ("quick_return_if_not_posdef", c_int), ("prefer_binary", c_int),
                ("print", c_int), ("precise", c_int), ("try_catch", c_int),
                ("error_handler", c_void_p), ("nmethods", c_int), ("current", c_int),
                ("selected", c_int), ("method", _Method * (CHOLMOD_MAXMETHODS + 1)),
                ("postorder", c_int)]


class _Sparse(ctypes.Structure):
    _fields_ = [("nrow", size_t), ("ncol", size_t), ("nzmax", size_t), ("p", c_void_p),
                ("i", c_void_p), ("nz", c_void_p), ("x", c_void_p), ("z", c_void_p),
                ("stype", c_int), ("itype", c_int), ("xtype", c_int), ("dtype", c_int),
                ("sorted", c_int), ("packed", c_int)]


class _Dense(ctypes.Structure):
    _fields_ = [("nrow", size_t), ("ncol", size_t), ("nzmax", size_t), ("d", size_t),
                ("x", c_void_p), ("z", c_void_p), ("xtype", c_int), ("dtype", c_int)]


class _Factor(ctypes.Structure):
    _fields_ = [("n", size_t), ("minor", size_t), ("Perm", c_void_p), ("ColCount", c_void_p),
                ("IPerm", c_void_p), ("nzmax", size_t), ("p", c_void_p), ("i", c_void_p),
                ("x", c_void_p), ("z", c_void_p), ("nz", c_void_p), ("next", c_void_p),
                ("prev", c_void_p), ("nsuper", size_t), ("ssize", size_t), ("xsize", size_t),
                ("maxcsize", size_t), ("maxesize", size_t), ("super", c_void_p),
                ("pi", c_void_p), ("px", c_void_p), ("s", c_void_p), ("ordering", c_int),
                ("is_ll", c_int), ("is_super", c_int), ("is_monotonic", c_int),
                ("itype", c_int), ("xtype", c_int), ("dtype", c_int), ("useGPU", c_int)]


class Cholmod:
    """CHOLMOD (int indices) through ctypes; raises RuntimeError when unusable."""

    COMMON_BYTES = 64 * 1024  # far larger than any cholmod_common (2664 bytes in 3.0)

    def __init__(self, path, mode):
        name = path or ctypes.util.find_library("cholmod")
        if not name:
            raise RuntimeError("no libcholmod found (apt-get install libsuitesparse-dev, "
                               "or --libcholmod PATH)")
        try:
            self.lib = ctypes.CDLL(name)
        except OSError as e:
            raise RuntimeError(f"cannot load {name}: {e}") from e
        lib = self.lib
        self.name = name
        version = (c_int * 3)()
        if hasattr(lib, "cholmod_version"):
            lib.cholmod_version(version)
        self.version = ".".join(str(v) for v in version)
        self.buf = ctypes.create_string_buffer(self.COMMON_BYTES)
        self.c = ctypes.cast(self.buf, c_void_p)
        lib.cholmod_start.argtypes = [c_void_p]
        lib.cholmod_finish.argtypes = [c_void_p]
        lib.cholmod_analyze.argtypes = [ctypes.POINTER(_Sparse), c_void_p]
        lib.cholmod_analyze.restype = ctypes.POINTER(_Factor)
        lib.cholmod_factorize.argtypes = [ctypes.POINTER(_Sparse), ctypes.POINTER(_Factor),
                                          c_void_p]
        lib.cholmod_solve.argtypes = [c_int, ctypes.POINTER(_Factor), ctypes.POINTER(_Dense),
                                      c_void_p]
        lib.cholmod_solve.restype = ctypes.POINTER(_Dense)
        lib.cholmod_free_factor.argtypes = [ctypes.POINTER(ctypes.POINTER(_Factor)), c_void_p]
        lib.cholmod_free_dense.argtypes = [ctypes.POINTER(ctypes.POINTER(_Dense)), c_void_p]
        if not lib.cholmod_start(self.c):
            raise RuntimeError("cholmod_start failed")
        self.started = True
        head = _CommonHead.from_buffer(self.buf)
        # The layout is trusted only if cholmod_start's documented defaults read back.
        expected = (head.grow0 == 1.2 and head.grow1 == 1.2 and head.grow2 == 5
                    and head.maxrank == 8 and head.supernodal_switch == 40.0
                    and head.supernodal == CHOLMOD_AUTO and head.nmethods == 0
                    and head.method[1].ordering == CHOLMOD_AMD and head.postorder == 1)
        if not expected:
            self.close()
            raise RuntimeError(f"unrecognised cholmod_common layout (CHOLMOD {self.version})")
        head.nmethods = 1
        head.method[0].ordering = CHOLMOD_AMD
        head.supernodal = {"supernodal": CHOLMOD_SUPERNODAL, "simplicial": CHOLMOD_SIMPLICIAL,
                           "auto": CHOLMOD_AUTO}[mode]
        head.postorder = 1

    def close(self):
        if getattr(self, "started", False):
            self.lib.cholmod_finish(self.c)
            self.started = False

    def run(self, lower, b):
        """Analyse, factorise and solve once; returns (times, x, facts)."""
        import numpy as np
        n = lower.shape[0]
        indptr = np.ascontiguousarray(lower.indptr, dtype=np.int32)
        indices = np.ascontiguousarray(lower.indices, dtype=np.int32)
        data = np.ascontiguousarray(lower.data, dtype=np.float64)
        a = _Sparse(n, n, data.size, indptr.ctypes.data, indices.ctypes.data, None,
                    data.ctypes.data, None, -1, CHOLMOD_INT, CHOLMOD_REAL, CHOLMOD_DOUBLE,
                    1, 1)
        rhs = np.ascontiguousarray(b, dtype=np.float64)
        bd = _Dense(n, 1, n, n, rhs.ctypes.data, None, CHOLMOD_REAL, CHOLMOD_DOUBLE)
        lib, c = self.lib, self.c
        c0 = time.process_time()
        t0 = time.perf_counter()
        f = lib.cholmod_analyze(ctypes.byref(a), c)
        t1 = time.perf_counter()
        if not f:
            raise RuntimeError("cholmod_analyze failed")
        try:
            ok = lib.cholmod_factorize(ctypes.byref(a), f, c)
            t2 = time.perf_counter()
            if not ok or f.contents.minor != n:
                raise RuntimeError("cholmod_factorize failed (matrix not positive definite?)")
            xd = lib.cholmod_solve(CHOLMOD_A, f, ctypes.byref(bd), c)
            t3 = time.perf_counter()
            cpu = time.process_time() - c0
            if not xd:
                raise RuntimeError("cholmod_solve failed")
            try:
                xp = ctypes.cast(xd.contents.x, ctypes.POINTER(c_double * n)).contents
                x = np.frombuffer(xp, dtype=np.float64).copy()
            finally:
                lib.cholmod_free_dense(ctypes.byref(xd), c)
            fc = f.contents
            facts = {"ordering": ORDERINGS.get(fc.ordering, str(fc.ordering)),
                     "supernodal": bool(fc.is_super),
                     "factor_entries": int(fc.xsize if fc.is_super else fc.nzmax)}
        finally:
            lib.cholmod_free_factor(ctypes.byref(f), c)
        return (t1 - t0, t2 - t1, t3 - t2, cpu), x, facts


def blas_name(lib):
    """The file that CHOLMOD's dgemm_ resolves to (dlsym through the library, then dladdr)."""

    class _DlInfo(ctypes.Structure):
        _fields_ = [("fname", ctypes.c_char_p), ("fbase", c_void_p), ("sname", ctypes.c_char_p),
                    ("saddr", c_void_p)]

    try:
        addr = ctypes.cast(lib.dgemm_, c_void_p)
        info = _DlInfo()
        if not ctypes.CDLL(None).dladdr(addr, ctypes.byref(info)) or not info.fname:
            return "unknown"
        path = os.path.realpath(info.fname.decode())
        return os.path.join(os.path.basename(os.path.dirname(path)), os.path.basename(path))
    except (AttributeError, OSError):
        return "unknown"


def relative_residual(a, x, b):
    import numpy as np
    r = b - a @ x
    norm_a = abs(a).sum(axis=1).max()
    return float(np.abs(r).max() / (norm_a * np.abs(x).max() + np.abs(b).max()))


def systems(paths):
    """(name, matrix file, rhs file) for each NAME.mtx of the directories, or file named."""
    out = []
    for p in paths:
        if os.path.isdir(p):
            files = [os.path.join(p, f) for f in os.listdir(p)
                     if f.endswith(".mtx") and not f.endswith("_b.mtx")]
            # In the order they were written (large_solve's order), then by name.
            out += sorted(files, key=lambda f: (os.stat(f).st_mtime_ns, f))
        elif p.endswith(".mtx"):
            out.append(p)
        else:
            raise ValueError(f"{p}: neither a directory nor a NAME.mtx file")
    return [(os.path.basename(f)[:-4], f, f[:-4] + "_b.mtx") for f in out]


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("paths", nargs="+", help="directories of NAME.mtx + NAME_b.mtx, or files")
    ap.add_argument("--runs", type=int, default=5, help="runs per solver (median reported)")
    ap.add_argument("--json", action="store_true", help="print JSON instead of the table")
    ap.add_argument("--solvers", default="cholmod,superlu", help="comma-separated list")
    ap.add_argument("--cholmod-mode", default="auto",
                    choices=["supernodal", "simplicial", "auto"],
                    help="CHOLMOD factor kind (auto: CHOLMOD's own choice by flops/nnz)")
    ap.add_argument("--libcholmod", default=None, help="path of the CHOLMOD shared library")
    args = ap.parse_args()
    if args.runs < 1:
        ap.error("--runs must be at least 1")
    try:
        import numpy as np
        import scipy
        import scipy.io
        import scipy.sparse as sp
        import scipy.sparse.linalg as sla
    except ImportError as e:
        print(f"reference solvers not run: {e} (pip install numpy scipy)")
        return 0
    try:
        todo = systems(args.paths)
    except (OSError, ValueError) as e:
        print(f"reference_solvers: {e}", file=sys.stderr)
        return 2
    if not todo:
        print("reference_solvers: no NAME.mtx files in " + ", ".join(args.paths),
              file=sys.stderr)
        return 2
    for name, a_file, b_file in todo:
        for f in (a_file, b_file):
            if not os.path.isfile(f):
                print(f"reference_solvers: {name}: no file {f}", file=sys.stderr)
                return 2
    wanted = set(args.solvers.split(","))
    notes = [f"numpy {np.__version__}, scipy {scipy.__version__}"]
    cholmod = None
    if "cholmod" in wanted:
        try:
            cholmod = Cholmod(args.libcholmod, args.cholmod_mode)
            notes.append(f"CHOLMOD {cholmod.version} ({cholmod.name}, BLAS: "
                         f"{blas_name(cholmod.lib)}), AMD only, factor kind: "
                         f"{args.cholmod_mode}")
        except RuntimeError as e:
            notes.append(f"CHOLMOD not available: {e}")
    rows = []
    try:
        for name, a_file, b_file in todo:
            t = time.perf_counter()
            try:
                a = scipy.io.mmread(a_file)
                b = np.asarray(scipy.io.mmread(b_file), dtype=np.float64).ravel()
                symmetric = scipy.io.mminfo(a_file)[5] == "symmetric"
            except (OSError, ValueError) as e:
                print(f"reference_solvers: {a_file}: {e}", file=sys.stderr)
                return 2
            a = sp.coo_matrix(a)
            if symmetric:
                # mmread may or may not have mirrored the stored triangle: rebuild both halves
                # from the lower one.
                lower = sp.tril(a).tocsc()
                full = (lower + sp.tril(lower, -1).T).tocsc()
            else:
                lower, full = None, a.tocsc()
            read_s = time.perf_counter() - t
            n = full.shape[0]
            base = {"system": name, "unknowns": n, "nonzeros": int(full.nnz), "read_s": read_s}
            full_csr = full.tocsr()
            if cholmod is not None:
                times = []
                if lower is None:
                    notes.append(f"{name}: not symmetric, CHOLMOD skipped")
                else:
                    x, facts = None, None
                    try:
                        for _ in range(args.runs):
                            ts, x, facts = cholmod.run(lower, b)
                            times.append(ts)
                    except RuntimeError as e:
                        notes.append(f"{name}: CHOLMOD failed: {e}")
                        times = []
                if times:
                    med = [statistics.median(t[k] for t in times) for k in range(4)]
                    rows.append(dict(base, solver="CHOLMOD", analyse_s=med[0],
                                     factor_s=med[1], solve_s=med[2], total_s=sum(med[:3]),
                                     cpu_s=med[3],
                                     residual=relative_residual(full_csr, x, b), **facts))
            if "superlu" in wanted:
                times, x, lu = [], None, None
                try:
                    for _ in range(args.runs):
                        lu = None  # free the previous factor before the next one
                        c0 = time.process_time()
                        t0 = time.perf_counter()
                        lu = sla.splu(full, permc_spec="MMD_AT_PLUS_A")
                        t1 = time.perf_counter()
                        x = lu.solve(b)
                        t2 = time.perf_counter()
                        times.append((t1 - t0, t2 - t1, time.process_time() - c0))
                except (RuntimeError, MemoryError) as e:
                    notes.append(f"{name}: SuperLU failed: {e}")
                    continue
                med = [statistics.median(t[k] for t in times) for k in range(3)]
                rows.append(dict(base, solver="SuperLU", analyse_s=None, factor_s=med[0],
                                 solve_s=med[1], total_s=sum(med[:2]), cpu_s=med[2],
                                 residual=relative_residual(full_csr, x, b),
                                 ordering="MMD_AT_PLUS_A", supernodal=True,
                                 factor_entries=int(lu.L.nnz + lu.U.nnz)))
                del lu
    finally:
        if cholmod is not None:
            cholmod.close()
    if args.json:
        import json
        print(json.dumps({"runs": args.runs, "notes": notes, "results": rows}, indent=1))
        return 0
    print(f"{'system':<8} {'unknowns':>9} {'solver':<8} {'ordering, factor kind':<26} {'analyse':>8} "
          f"{'factor':>8} {'solve':>8} {'total s':>8} {'cpu s':>7} {'factor nnz':>11}  residual")
    for r in rows:
        analyse = "(in f.)" if r["analyse_s"] is None else f"{r['analyse_s']:.3f}"
        kind = f"{r['ordering']}, {'supernodal' if r['supernodal'] else 'simplicial'}"
        print(f"{r['system']:<8} {r['unknowns']:>9} {r['solver']:<8} {kind:<26} "
              f"{analyse:>8} {r['factor_s']:>8.3f} {r['solve_s']:>8.3f} {r['total_s']:>8.3f} "
              f"{r['cpu_s']:>7.3f} {r['factor_entries']:>11}  {r['residual']:.1e}")
    print(f"\nseconds, medians of {args.runs} runs, one thread. SuperLU's factor includes its "
          "analysis; total is wall time, cpu the process CPU time of the same phases (below the "
          "total when the machine is shared and the process waits for a core); factor nnz = stored factor entries (CHOLMOD: L, supernodal with "
          "its supernode padding; SuperLU: L + U).")
    for note in notes:
        print(note)
    return 0


if __name__ == "__main__":
    sys.exit(main())
