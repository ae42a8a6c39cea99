#!/usr/bin/env python3
"""Produce genloom's golden test data from outside references.

Every file under tests/golden/ (except this script and README.md) is written
by this one script, deterministically, byte for byte.  The numbers come from
NumPy, SciPy, the `onnx` package (helper API, checker, ReferenceEvaluator)
and nothing of genloom's own; the Rust tests compare against them.

    python tests/golden/make_goldens.py            # regenerate in place
    python tests/golden/make_goldens.py --out DIR  # write somewhere else
    python tests/golden/make_goldens.py --check    # regenerate into a temp
                                                   # dir, compare byte for byte

Number encoding: every float is stored as the hex of its IEEE 754 bit pattern
(f64: 16 hex digits, f32: 8), u64 as 16 hex digits, u32 as 8.  Arrays are
flattened row-major with a separate "shape" list.
"""

import os
import platform
import sys


def _pin_cpu_dispatch():
    """Make NumPy/OpenBLAS pick the same kernels on every x86-64 machine.

    NumPy dispatches some float loops (sin, cos, tanh, exp, ...) to SIMD
    variants chosen at run time, and OpenBLAS picks a GEMM kernel per CPU.
    Different kernels may differ in the last bit, which would make --check
    depend on the CPU model.  Pin NumPy to its baseline and OpenBLAS to one
    kernel family, single-threaded.  Must run before numpy is imported.
    """
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    os.environ["OMP_NUM_THREADS"] = "1"
    if platform.machine().lower() in ("x86_64", "amd64"):
        os.environ["NPY_ENABLE_CPU_FEATURES"] = "X86_V2"
        try:
            with open("/proc/cpuinfo", encoding="ascii", errors="replace") as f:
                has_avx2 = " avx2" in f.read()
        except OSError:
            has_avx2 = False
        if has_avx2:
            os.environ["OPENBLAS_CORETYPE"] = "Haswell"


if __name__ == "__main__":
    _pin_cpu_dispatch()

import argparse  # noqa: E402
import copy  # noqa: E402
import filecmp  # noqa: E402
import importlib.metadata  # noqa: E402
import io  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import shutil  # noqa: E402
import tempfile  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
REQUIREMENTS = HERE.parent / "requirements.txt"
# Files in this folder that the script does not produce.
NOT_GENERATED = {"README.md", "make_goldens.py"}

U64 = (1 << 64) - 1
NP_VER = np.__version__


# --------------------------------------------------------------------------
# encoding helpers
# --------------------------------------------------------------------------

def hx64(a):
    """float64 values -> list of 16-digit hex bit patterns (row-major)."""
    a = np.ascontiguousarray(np.asarray(a, dtype=np.float64)).astype("<f8")
    return ["%016x" % int(v) for v in a.reshape(-1).view("<u8")]


def hx32(a):
    """float32 values -> list of 8-digit hex bit patterns (row-major).

    The input must already be float32 (no silent casts here)."""
    a = np.asarray(a)
    assert a.dtype == np.float32, a.dtype
    a = np.ascontiguousarray(a).astype("<f4")
    return ["%08x" % int(v) for v in a.reshape(-1).view("<u4")]


def f64hex(x):
    return hx64([x])[0]


def u64hex(x):
    assert 0 <= int(x) <= U64
    return "%016x" % int(x)


def u32hex(x):
    assert 0 <= int(x) < (1 << 32)
    return "%08x" % int(x)


def _is_scalar(v):
    return v is None or isinstance(v, (str, int, float, bool))


def _dump(obj, level):
    pad = " " * level
    inner = " " * (level + 1)
    if isinstance(obj, dict):
        if not obj:
            return "{}"
        parts = []
        for k, v in obj.items():
            parts.append(inner + json.dumps(str(k)) + ": " + _dump(v, level + 1))
        return "{\n" + ",\n".join(parts) + "\n" + pad + "}"
    if isinstance(obj, (list, tuple)):
        if not obj:
            return "[]"
        if all(_is_scalar(v) for v in obj):
            if len(obj) <= 8:
                return "[" + ", ".join(json.dumps(v) for v in obj) + "]"
            rows = []
            for i in range(0, len(obj), 8):
                rows.append(inner + ", ".join(json.dumps(v) for v in obj[i:i + 8]))
            return "[\n" + ",\n".join(rows) + "\n" + pad + "]"
        return "[\n" + ",\n".join(inner + _dump(v, level + 1) for v in obj) + "\n" + pad + "]"
    if isinstance(obj, float):
        assert math.isfinite(obj)
        return repr(obj)
    return json.dumps(obj)


def write_json(path, obj):
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write(_dump(obj, 0))
        f.write("\n")


# --------------------------------------------------------------------------
# Philox4x64-10
# --------------------------------------------------------------------------

def _words_to_int(words):
    return sum((int(w) & U64) << (64 * i) for i, w in enumerate(words))


def _int_to_words(n, count):
    return [(n >> (64 * i)) & U64 for i in range(count)]


def numpy_philox_at(counter, key):
    """A numpy Philox whose next block is block(counter, key).

    NumPy increments its 256-bit counter *before* producing a block, so the
    state is set to counter - 1 (mod 2^256).  The words are passed as a
    uint64 array: a plain Python list of ints above 2^63 is converted through
    float64 by NumPy and silently loses bits."""
    c = (_words_to_int(counter) - 1) % (1 << 256)
    cw = np.array(_int_to_words(c, 4), dtype=np.uint64)
    kw = np.array([int(k) & U64 for k in key], dtype=np.uint64)
    bg = np.random.Philox(counter=cw, key=kw)
    st = bg.state["state"]
    assert [int(v) for v in st["counter"]] == [int(v) for v in cw]
    assert [int(v) for v in st["key"]] == [int(v) for v in kw]
    return bg


def philox_block(counter, key):
    return [int(v) for v in numpy_philox_at(counter, key).random_raw(4)]


def philox_stream(counter, key, nblocks):
    """block(counter), block(counter+1), ... flattened (4 u64 per block)."""
    return [int(v) for v in numpy_philox_at(counter, key).random_raw(4 * nblocks)]


def _philox_transcription(counter, key):
    """Direct transcription of Philox4x64-10 (Salmon et al., SC 2011).

    Used only to assert that NumPy computes the published function."""
    m0, m1 = 0xD2E7470EE14C6C93, 0xCA5A826395121157
    w0, w1 = 0x9E3779B97F4A7C15, 0xBB67AE8584CAA73B
    c = [int(x) & U64 for x in counter]
    k = [int(x) & U64 for x in key]
    for r in range(10):
        if r:
            k = [(k[0] + w0) & U64, (k[1] + w1) & U64]
        p0 = m0 * c[0]
        p1 = m1 * c[2]
        c = [(p1 >> 64) ^ c[1] ^ k[0], p1 & U64, (p0 >> 64) ^ c[3] ^ k[1], p0 & U64]
    return c


RANDOM123_KAT = [
    # philox4x64-10 known answers, counter[4], key[2], output[4]
    ([0, 0, 0, 0], [0, 0],
     [0x16554D9ECA36314C, 0xDB20FE9D672D0FDC, 0xD7E772CEE186176B, 0x7E68B68AEC7BA23B]),
    ([U64, U64, U64, U64], [U64, U64],
     [0x87B092C3013FE90B, 0x438C3C67BE8D0224, 0x9CC7D7C69CD777B6, 0xA09CAEBF594F0BA0]),
    ([0x243F6A8885A308D3, 0x13198A2E03707344, 0xA4093822299F31D0, 0x082EFA98EC4E6C89],
     [0x452821E638D01377, 0xBE5466CF34E90C6C],
     [0xA528F45403E61D95, 0x38C72DBD566E9788, 0xA5A1610E72FD18B5, 0x57BD43B5E52B7FE6]),
]


def gen_philox4x64(out):
    src = "numpy %s numpy.random.Philox (random_raw after setting counter-1)" % NP_VER
    specs = []
    for c, k, _ in RANDOM123_KAT:
        specs.append((c, k))
    for key in ([0, 0], [7, 0], [2026, 0], [2026, 1]):
        for c0 in range(6):
            specs.append(([c0, 0, 0, 0], key))
    # carries and borrows across counter words
    specs += [
        ([U64, 0, 0, 0], [2026, 0]),
        ([U64, U64, 0, 0], [2026, 0]),
        ([U64, U64, U64, 0], [7, 0]),
        ([0, 1, 0, 0], [2026, 0]),
        ([0, 0, 1, 0], [2026, 0]),
        ([0, 1000, 0, 0], [7, 0]),
        ([3, 5, 0, 0], [U64, 0]),
        ([0, 0, 0, 0], [U64, 0]),
        ([0, 0, 0, 0], [0x9E3779B97F4A7C15, 0xBB67AE8584CAA73B]),
        ([1, 2, 3, 4], [0xFEDCBA9876543210, 0x0123456789ABCDEF]),
        ([0x8000000000000000, 0x8000000000000000, 0, 0], [0x8000000000000000, 1]),
    ]
    cases = []
    seen = set()
    for c, k in specs:
        if (tuple(c), tuple(k)) in seen:
            continue
        seen.add((tuple(c), tuple(k)))
        o = philox_block(c, k)
        assert o == _philox_transcription(c, k), (c, k)
        cases.append({
            "counter": [u64hex(x) for x in c],
            "key": [u64hex(x) for x in k],
            "output": [u64hex(x) for x in o],
        })
    for c, k, expected in RANDOM123_KAT:
        got = philox_block(c, k)
        assert got == expected, ("NumPy disagrees with the Random123 KAT", c, k, got)
        cases.append({
            "source": "Random123 kat_vectors (from memory)",
            "numpy_agrees": True,
            "counter": [u64hex(x) for x in c],
            "key": [u64hex(x) for x in k],
            "output": [u64hex(x) for x in expected],
        })
    # a stream check: consecutive blocks from one generator = separate calls
    s = philox_stream([U64 - 1, 0, 0, 0], [2026, 0], 3)
    for b in range(3):
        c = _int_to_words(_words_to_int([U64 - 1, 0, 0, 0]) + b, 4)
        assert s[4 * b:4 * b + 4] == philox_block(c, [2026, 0])
    write_json(out / "rng" / "philox4x64.json", {
        "source": src,
        "function": "Philox4x64-10 block(counter[4] u64, key[2] u64) -> 4 u64; "
                    "word 0 of the counter is the least significant",
        "numpy_counter_semantics": "numpy.random.Philox increments its 256-bit counter (with carry) "
                                   "before producing each block, so block(C, K) is the first "
                                   "random_raw(4) of Philox(counter=C-1 mod 2^256, key=K). Counter and "
                                   "key must be given as uint64 arrays: a Python list of ints >= 2^63 "
                                   "goes through float64 and silently loses bits.",
        "cases": cases,
    })


# --------------------------------------------------------------------------
# latent transform on Philox (our specification, computed with NumPy)
# --------------------------------------------------------------------------

GAUSS_SPEC = (
    "Latent row i for seed s (u64), stream k1 = 0, dimension d. Draw u64 values from blocks "
    "block(counter=[b, i, 0, 0], key=[s, 0]) of Philox4x64-10 for b = 0, 1, 2, ..., taking each "
    "block's 4 outputs in order; the u64 sequence for row i is x0, x1, x2, .... Gaussian components "
    "are produced two at a time from consecutive pairs (x_{2m}, x_{2m+1}): "
    "u1 = ((x_{2m} >> 11) + 1) * 2^-53 (in (0,1]), u2 = (x_{2m+1} >> 11) * 2^-53 (in [0,1)), "
    "r = sqrt(-2 ln u1), theta = (2*pi) * u2 with 2*pi the float64 constant 0x401921fb54442d18, "
    "z_{2m} = r*cos(theta), z_{2m+1} = r*sin(theta); all in float64; component j of the row is "
    "float32(z_j) (round to nearest). For odd d the last pair's sine value is discarded. "
    "Uniform prior: component j = float32(2 * ((x_j >> 11) * 2^-53) - 1) (in [-1,1)), one u64 per "
    "component. Truncated gaussian by resampling with threshold c: walk z_0, z_1, ... (continuing "
    "into further blocks as needed) and keep the components with |z| <= c, compared in float64 "
    "before the float32 cast, in order, until d are kept."
)


def row_u64(seed, row, n):
    nblocks = (n + 3) // 4
    return philox_stream([0, row, 0, 0], [seed, 0], nblocks)[:n]


def gauss_pairs_numpy(xs):
    x = np.array(xs, dtype=np.uint64)
    assert x.size % 2 == 0
    a = (x[0::2] >> np.uint64(11)) + np.uint64(1)
    b = x[1::2] >> np.uint64(11)
    u1 = a.astype(np.float64) * (2.0 ** -53)
    u2 = b.astype(np.float64) * (2.0 ** -53)
    r = np.sqrt(-2.0 * np.log(u1))
    theta = (2.0 * np.pi) * u2
    z = np.empty(x.size, dtype=np.float64)
    z[0::2] = r * np.cos(theta)
    z[1::2] = r * np.sin(theta)
    return z


def gauss_pairs_libm(xs):
    """Same transform with Python's math module (C libm): a cross-check."""
    z = []
    for m in range(0, len(xs), 2):
        u1 = ((xs[m] >> 11) + 1) * (2.0 ** -53)
        u2 = (xs[m + 1] >> 11) * (2.0 ** -53)
        r = math.sqrt(-2.0 * math.log(u1))
        th = (2.0 * math.pi) * u2
        z += [r * math.cos(th), r * math.sin(th)]
    return np.array(z, dtype=np.float64)


def gauss_components(seed, row, n):
    """First n float64 gaussian components z_0..z_{n-1} of a row."""
    n_even = n + (n % 2)
    xs = row_u64(seed, row, n_even)
    z = gauss_pairs_numpy(xs)
    zl = gauss_pairs_libm(xs)
    # The stored values are float32; NumPy and libm must agree on them.
    assert np.array_equal(z.astype(np.float32).view(np.uint32),
                          zl.astype(np.float32).view(np.uint32)), (seed, row)
    return z[:n]


def uniform_components(seed, row, n):
    x = np.array(row_u64(seed, row, n), dtype=np.uint64)
    u = (x >> np.uint64(11)).astype(np.float64) * (2.0 ** -53)
    return (2.0 * u - 1.0).astype(np.float32)


def truncated_components(seed, row, d, c):
    n = 256
    while True:
        z = gauss_components(seed, row, n)
        kept = z[np.abs(z) <= c]
        if kept.size >= d:
            return kept[:d].astype(np.float32), int(np.nonzero(np.abs(z) <= c)[0][d - 1]) + 1
        n *= 2


def gen_philox_gaussian(out):
    cases = []
    seeds = [0, 1, 7, 2026, U64]

    def add(prior, seed, row, dim, vals, **extra):
        case = {"prior": prior, "seed": u64hex(seed), "row": row, "dim": dim}
        case.update(extra)
        case["values"] = hx32(vals)
        assert len(case["values"]) == dim
        cases.append(case)

    for seed in seeds:
        for row in [0, 1, 5, 1000]:
            add("gaussian", seed, row, 64, gauss_components(seed, row, 64).astype(np.float32))
            add("uniform", seed, row, 64, uniform_components(seed, row, 64))
    for dim in [3, 513]:
        for row in [0, 2]:
            add("gaussian", 7, row, dim, gauss_components(7, row, dim).astype(np.float32))
            add("uniform", 7, row, dim, uniform_components(7, row, dim))
    # consistency: a prefix of a longer row is the shorter row
    assert np.array_equal(gauss_components(7, 0, 3), gauss_components(7, 0, 513)[:3])
    for c in [0.5, 1.0, 2.0]:
        for row in [0, 3]:
            vals, used = truncated_components(2026, row, 64, c)
            add("gaussian-truncated", 2026, row, 64, vals,
                threshold=f64hex(c), threshold_decimal=c, components_walked=used)
    write_json(out / "rng" / "philox-gaussian.json", {
        "source": "numpy %s (numpy.random.Philox raw blocks, float64 log/sqrt/cos/sin); "
                  "float32 results cross-checked against Python math (C libm)" % NP_VER,
        "spec": GAUSS_SPEC,
        "fields": "seed: u64 hex; row: counter word 1; dim: d; values: f32 bit patterns; "
                  "threshold: f64 bit pattern of c; components_walked: how many z_j were "
                  "examined to keep d (informational)",
        "cases": cases,
    })


# --------------------------------------------------------------------------
# NumPy legacy RandomState
# --------------------------------------------------------------------------

def gen_randomstate(out):
    cases = []
    for seed in [0, 1, 42, 2026, 4294967295]:
        for shape in [(1, 1), (3, 5), (16, 64), (2, 513)]:
            sn = np.random.RandomState(seed).standard_normal(shape)
            assert sn.dtype == np.float64
            cases.append({"method": "standard_normal", "seed": seed, "shape": list(shape),
                          "values": hx64(sn)})
            rs = np.random.RandomState(seed).random_sample(shape)
            assert rs.dtype == np.float64
            cases.append({"method": "random_sample", "seed": seed, "shape": list(shape),
                          "values": hx64(rs)})
    un = np.random.RandomState(2026).uniform(-1, 1, (4, 64))
    cases.append({"method": "uniform", "args": {"low": -1.0, "high": 1.0}, "seed": 2026,
                  "shape": [4, 64], "values": hx64(un)})

    mt = []
    for seed in [5489, 2026]:
        rs = np.random.RandomState(seed)
        raw = [int(v) for v in rs._bit_generator.random_raw(16)]
        mt.append({"seed": seed, "first_16": [u32hex(v) for v in raw]})
    # legacy init_genrand seeding checks
    assert int(np.random.RandomState(5489)._bit_generator.random_raw(1)[0]) == 3499211612
    r10000 = int(np.random.RandomState(5489)._bit_generator.random_raw(10000)[-1])
    assert r10000 == 4123659995, r10000
    # RandomState(seed) seeds with init_genrand, MT19937(seed) does not
    assert (int(np.random.MT19937(5489).random_raw(1)[0]) != 3499211612)
    write_json(out / "rng" / "numpy-randomstate.json", {
        "source": "numpy %s numpy.random.RandomState (legacy MT19937, init_genrand seeding)" % NP_VER,
        "notes": [
            "Each case uses a fresh RandomState(seed); values are float64 bit patterns, row-major.",
            "standard_normal is the legacy gauss: Marsaglia polar method on pairs of random_sample "
            "draws (x1 = 2*u - 1, x2 = 2*u - 1, r2 = x1^2 + x2^2, reject r2 >= 1 or r2 == 0, "
            "f = sqrt(-2 ln(r2) / r2)); it returns f*x2 and caches f*x1 as the next value.",
            "random_sample takes two u32 outputs a, b: ((a >> 5) * 67108864 + (b >> 6)) / 2^53.",
            "uniform(low, high) = low + (high - low) * random_sample.",
            "All outputs are float64; a float32 latent is the caller's cast (round to nearest).",
            "RandomState(seed) seeds MT19937 with init_genrand(seed & 0xffffffff); "
            "numpy.random.MT19937(seed) uses SeedSequence instead and gives different numbers.",
        ],
        "cases": cases,
        "mt19937_raw": {
            "how": "RandomState(seed)._bit_generator.random_raw(16), u32 hex",
            "cases": mt,
            "seed_5489_first": u32hex(3499211612),
            "seed_5489_10000th": u32hex(r10000),
            "seed_5489_10000th_decimal": r10000,
            "check": "the 10000th output for seed 5489 equals 4123659995, the value the C++ "
                     "standard gives for the default-constructed std::mt19937 ([rand.predef])",
        },
    })


# --------------------------------------------------------------------------
# latent interpolation
# --------------------------------------------------------------------------

INTERP_SPEC = (
    "float64. lerp(a,b,t) = (1-t)*a + t*b. slerp(a,b,t): na=|a|, nb=|b|; if na == 0 or nb == 0 "
    "-> lerp. cos = clip(dot(a,b)/(na*nb), -1, 1); omega = arccos(cos). If omega < 1e-4 -> lerp "
    "(parallel). If pi - omega < 1e-4 (antiparallel): k = argmin_j |a_j| (first index on ties), "
    "e = unit vector e_k, p = e - (dot(e,a)/na^2) a, p = p / |p| * (na + nb)/2; for t <= 0.5 "
    "result = slerp(a, p, 2t), for t > 0.5 result = slerp(p, b, 2t - 1). Otherwise (Shoemake "
    "1985): result = sin((1-t)*omega)/sin(omega) * a + sin(t*omega)/sin(omega) * b."
)


def _dot(a, b):
    return math.fsum((np.asarray(a) * np.asarray(b)).tolist())


def _norm(a):
    return math.sqrt(_dot(a, a))


def lerp(a, b, t):
    return (1.0 - t) * a + t * b


def slerp(a, b, t, _branch=None):
    na, nb = _norm(a), _norm(b)
    if na == 0.0 or nb == 0.0:
        return lerp(a, b, t), "lerp-zero"
    cos = min(1.0, max(-1.0, _dot(a, b) / (na * nb)))
    omega = math.acos(cos)
    if omega < 1e-4:
        return lerp(a, b, t), "lerp-parallel"
    if math.pi - omega < 1e-4:
        k = int(np.argmin(np.abs(a)))
        e = np.zeros_like(a)
        e[k] = 1.0
        p = e - (_dot(e, a) / (na * na)) * a
        p = p / _norm(p) * ((na + nb) / 2.0)
        if t <= 0.5:
            r, br = slerp(a, p, 2.0 * t)
        else:
            r, br = slerp(p, b, 2.0 * t - 1.0)
        assert br == "shoemake"
        return r, "antiparallel"
    s = math.sin(omega)
    return (math.sin((1.0 - t) * omega) / s) * a + (math.sin(t * omega) / s) * b, "shoemake"


def _slerp_numpy_check(a, b, t):
    """Same formula with NumPy's dot/arccos/sin, for a tolerance cross-check."""
    na, nb = np.linalg.norm(a), np.linalg.norm(b)
    if na == 0 or nb == 0:
        return lerp(a, b, t)
    om = np.arccos(np.clip(np.dot(a, b) / (na * nb), -1, 1))
    if om < 1e-4:
        return lerp(a, b, t)
    if np.pi - om < 1e-4:
        return None
    return np.sin((1 - t) * om) / np.sin(om) * a + np.sin(t * om) / np.sin(om) * b


def gen_interp(out):
    rng = np.random.default_rng(11)
    ts = [0.0, 0.1, 0.25, 0.5, 0.9, 1.0]
    pairs = []
    a8, b8 = rng.standard_normal(8), rng.standard_normal(8)
    a64, b64 = rng.standard_normal(64), rng.standard_normal(64)
    pairs.append(("gaussian-8", a8, b8))
    pairs.append(("gaussian-64", a64, b64))
    noise = rng.standard_normal(8)
    pairs.append(("nearly-parallel-8", a8, 2.0 * a8 + 1e-9 * noise))
    pairs.append(("parallel-8", a8, 3.0 * a8))
    pairs.append(("antiparallel-8", a8, -a8))
    pairs.append(("antiparallel-64", a64, -a64))
    pairs.append(("zero-a-8", np.zeros(8), b8))
    e0, e1 = np.zeros(8), np.zeros(8)
    e0[0], e1[1] = 1.0, 1.0
    pairs.append(("orthogonal-unit-8", e0, e1))

    cases = []
    for name, a, b in pairs:
        lr, sl, branches = [], [], []
        for t in ts:
            lr.append(lerp(a, b, t))
            s, br = slerp(a, b, t)
            sl.append(s)
            branches.append(br)
            chk = _slerp_numpy_check(a, b, t)
            if chk is not None:
                assert np.allclose(chk, s, rtol=1e-12, atol=1e-12), (name, t)
        assert len(set(branches)) == 1, branches
        na, nb = _norm(a), _norm(b)
        omega = None
        if na > 0 and nb > 0:
            omega = math.acos(min(1.0, max(-1.0, _dot(a, b) / (na * nb))))
        cases.append({
            "name": name,
            "dim": int(a.size),
            "branch": branches[0],
            "omega": None if omega is None else f64hex(omega),
            "a": hx64(a),
            "b": hx64(b),
            "t": hx64(ts),
            "t_decimal": ts,
            "out_shape": [len(ts), int(a.size)],
            "lerp": hx64(np.stack(lr)),
            "slerp": hx64(np.stack(sl)),
        })

    # angle from a along the slerp path.  With |a| == |b| it steps evenly by
    # omega/8; with unequal norms (the raw gaussian pair) Shoemake's weights
    # still end at b but the angle does not grow linearly in t.
    t9 = [i / 8.0 for i in range(9)]

    def path(a, b, name, even):
        omega = math.acos(_dot(a, b) / (_norm(a) * _norm(b)))
        angles = []
        for t in t9:
            s, br = slerp(a, b, t)
            assert br == "shoemake"
            c = min(1.0, max(-1.0, _dot(a, s) / (_norm(a) * _norm(s))))
            angles.append(math.acos(c))
        assert all(x < y for x, y in zip(angles, angles[1:]))
        if even:
            for i, ang in enumerate(angles):
                assert abs(ang - omega * t9[i]) < 1e-7, (i, ang)
        return {
            "pair": name,
            "a": hx64(a),
            "b": hx64(b),
            "t": hx64(t9),
            "omega": f64hex(omega),
            "angles": hx64(angles),
            "angles_decimal": angles,
            "steps_evenly": even,
        }

    b_eq = b64 * (_norm(a64) / _norm(b64))
    path_angles = [
        path(a64, b_eq, "gaussian-64 with b rescaled to |a|", True),
        path(a64, b64, "gaussian-64 (|a| != |b|)", False),
    ]
    write_json(out / "latent" / "interp.json", {
        "source": "numpy %s arrays (elementwise float64); dot via math.fsum, acos/sin via Python "
                  "math (C libm), cross-checked against numpy.dot/arccos/sin to 1e-12" % NP_VER,
        "spec": INTERP_SPEC,
        "tolerance_hint": "lerp is exact elementwise arithmetic; slerp goes through acos/sin, whose "
                          "last bit differs between libm implementations: compare slerp with a "
                          "relative tolerance around 1e-12",
        "inputs": "a, b: f64 bit patterns of the two latents (dim each); t: f64 bit patterns; "
                  "lerp, slerp: f64 bit patterns, shape out_shape = [len(t), dim], row r is t[r]",
        "cases": cases,
        "path_angles": path_angles,
        "path_angles_meaning": "angle between a and slerp(a,b,t) at t = i/8; for |a| == |b| it "
                               "equals t*omega up to rounding (acos near 0 is ill-conditioned, "
                               "compare with ~1e-7 absolute); for unequal norms it is only "
                               "monotone, not linear in t",
    })


# --------------------------------------------------------------------------
# truncated normal variance
# --------------------------------------------------------------------------

def gen_truncnorm(out):
    import scipy
    import scipy.stats
    cases = []
    for c in [0.5, 1.0, 1.5, 2.0, 2.5, 3.0]:
        v = float(scipy.stats.truncnorm(-c, c).var())
        cases.append({"c": f64hex(c), "c_decimal": c, "variance": f64hex(v),
                      "variance_decimal": v})
    assert abs(float(scipy.stats.truncnorm(-1.0, 1.0).var()) - 0.2911) < 1e-4
    assert abs(float(scipy.stats.truncnorm(-2.0, 2.0).var()) - 0.7737) < 1e-4
    write_json(out / "latent" / "truncnorm.json", {
        "source": "scipy %s scipy.stats.truncnorm(-c, c).var()" % scipy.__version__,
        "meaning": "variance of the standard normal truncated to [-c, c]; the hex fields are the "
                   "f64 bit patterns, the _decimal fields are copies for humans",
        "cases": cases,
    })


# --------------------------------------------------------------------------
# .npy files
# --------------------------------------------------------------------------

def _npy_values(arr):
    flat = np.ascontiguousarray(arr).reshape(-1)
    if arr.dtype.kind == "f":
        if arr.dtype.itemsize == 4:
            return "f32-bits-hex", hx32(flat.astype(np.float32))
        return "f64-bits-hex", hx64(flat.astype(np.float64))
    if arr.dtype.kind in "iu":
        return "decimal-string", [str(int(v)) for v in flat]
    raise ValueError(arr.dtype)


def gen_npy(out):
    d = out / "npy"
    d.mkdir(parents=True, exist_ok=True)
    entries = []

    def entry(fname, arr, version, strict, expect_error=None, note=None, values=True):
        e = {"file": fname, "descr": np.lib.format.dtype_to_descr(arr.dtype),
             "shape": list(arr.shape), "fortran_order": bool(arr.flags.f_contiguous and arr.ndim > 1
                                                             and not arr.flags.c_contiguous),
             "version": list(version), "strict_reader": strict}
        if expect_error is not None:
            e["expect_error"] = expect_error
        if values:
            enc, vals = _npy_values(arr)
            e["value_encoding"] = enc
            e["values"] = vals
        if note:
            e["note"] = note
        entries.append(e)

    def save(fname, arr, **kw):
        with open(d / fname, "wb") as f:
            np.save(f, arr, **kw)

    a = (np.arange(12, dtype=np.float64) / 7.0).astype(np.float32).reshape(3, 4)
    save("f32_3x4.npy", a)
    entry("f32_3x4.npy", a, (1, 0), "accept", note="float32 arange(12)/7 (computed in float64)")

    a = np.random.default_rng(3).standard_normal((2, 64))
    save("f64_2x64.npy", a)
    entry("f64_2x64.npy", a, (1, 0), "accept", note="default_rng(3).standard_normal((2,64))")

    a = np.array([-2, -1, 0, 1, 2 ** 40], dtype=np.int64)
    save("i64_5.npy", a)
    entry("i64_5.npy", a, (1, 0), "accept")

    a = np.array([-2147483648, -1, 0, 2147483647], dtype=np.int32)
    save("i32_4.npy", a)
    entry("i32_4.npy", a, (1, 0), "accept")

    a = np.array([[0, 1, 127], [128, 254, 255]], dtype=np.uint8)
    save("u8_2x3.npy", a)
    entry("u8_2x3.npy", a, (1, 0), "accept")

    a = np.array(np.float32(-1.25))
    save("f32_scalar.npy", a)
    entry("f32_scalar.npy", a, (1, 0), "accept", note="0-d array, shape []")

    a = np.zeros((0, 64), dtype=np.float32)
    save("f32_empty_0x64.npy", a)
    entry("f32_empty_0x64.npy", a, (1, 0), "accept", note="no data bytes after the header")

    a = (np.arange(6, dtype=np.float64) - 2.5).astype(">f4").reshape(2, 3)
    save("f32_big_endian.npy", a)
    entry("f32_big_endian.npy", a, (1, 0), "accept-convert", expect_error="endianness-ok",
          note="descr '>f4'; values listed are the logical numbers (as native f32 bit patterns); "
               "a reader may convert byte order or refuse with a clear error")

    a = np.asfortranarray((np.arange(6, dtype=np.float64) / 4.0).astype(np.float32).reshape(2, 3))
    save("f32_fortran.npy", a)
    entry("f32_fortran.npy", a, (1, 0), "refuse", expect_error="fortran",
          note="fortran_order True; values listed are the logical (row-major) values, the file "
               "stores them column-major")

    a = np.random.default_rng(4).standard_normal((2, 3))
    with open(d / "f64_v2.npy", "wb") as f:
        np.lib.format.write_array(f, a, version=(2, 0))
    entry("f64_v2.npy", a, (2, 0), "refuse", expect_error="version",
          note="format version 2.0 (4-byte header length); a strict v1.0 reader refuses")

    a = np.array([1, "two", None], dtype=object)
    save("object_pickle.npy", a, allow_pickle=True)
    entries.append({"file": "object_pickle.npy", "descr": "|O", "shape": [3],
                    "fortran_order": False, "version": [1, 0], "strict_reader": "refuse",
                    "expect_error": "pickle", "note": "dtype object; the payload is a pickle"})

    a = np.random.default_rng(5).standard_normal((4, 64)).astype(np.float32)
    buf = io.BytesIO()
    np.save(buf, a)
    full = buf.getvalue()
    with open(d / "f32_truncated.npy", "wb") as f:
        f.write(full[:len(full) // 2])
    entries.append({"file": "f32_truncated.npy", "descr": "<f4", "shape": [4, 64],
                    "fortran_order": False, "version": [1, 0], "strict_reader": "refuse",
                    "expect_error": "truncated",
                    "note": "a valid (4,64) float32 file cut to half its %d bytes (%d kept): the "
                            "header is whole, the data ends early" % (len(full), len(full) // 2)})

    a = np.random.default_rng(6).standard_normal((3, 64)).astype(np.float32)
    with open(d / "f32_size_mismatch.npy", "wb") as f:
        np.lib.format.write_array_header_1_0(
            f, {"descr": "<f4", "fortran_order": False, "shape": (10, 64)})
        f.write(a.astype("<f4").tobytes())
    entries.append({"file": "f32_size_mismatch.npy", "descr": "<f4", "shape": [10, 64],
                    "fortran_order": False, "version": [1, 0], "strict_reader": "refuse",
                    "expect_error": "size-mismatch",
                    "note": "header declares (10,64) but only 3 rows (768 bytes) of data follow"})

    # self-check: numpy reads back what the manifest says
    for e in entries:
        p = d / e["file"]
        if e.get("expect_error") in (None, "endianness-ok", "fortran", "version"):
            arr = np.load(p, allow_pickle=False)
            assert list(arr.shape) == e["shape"]
            assert np.lib.format.dtype_to_descr(arr.dtype) == e["descr"]
            assert _npy_values(arr)[1] == e["values"], e["file"]
            with open(p, "rb") as f:
                assert list(np.lib.format.read_magic(f)) == e["version"]
        elif e["expect_error"] == "pickle":
            try:
                np.load(p, allow_pickle=False)
                raise AssertionError("pickle file loaded without allow_pickle")
            except ValueError:
                pass
        else:
            try:
                np.load(p, allow_pickle=False)
                raise AssertionError("%s loaded" % e["file"])
            except ValueError:
                pass

    write_json(d / "manifest.json", {
        "source": "numpy %s np.save / np.lib.format.write_array (NPY format)" % NP_VER,
        "strict_reader_rule": "accept: little-endian <f4 <f8 <i8 <i4 |u1, C order, format "
                              "version 1.0, data length = product(shape) * itemsize. "
                              "accept-convert: big-endian data may be accepted by converting "
                              "(or refused with a clear error). refuse: everything else.",
        "fields": "descr, shape, fortran_order and version are what the header says; values are "
                  "the logical row-major elements (value_encoding: f32-bits-hex, f64-bits-hex, "
                  "or decimal-string for integers); expect_error is one of truncated | fortran | "
                  "version | pickle | endianness-ok | size-mismatch",
        "files": entries,
    })


# --------------------------------------------------------------------------
# ONNX test generators
# --------------------------------------------------------------------------

def gen_models(out):
    import onnx
    from onnx import TensorProto, helper, numpy_helper
    from onnx.reference import ReferenceEvaluator

    d = out / "models"
    d.mkdir(parents=True, exist_ok=True)
    OPSET, IR = 17, 8
    FLOAT, INT64, INT32 = TensorProto.FLOAT, TensorProto.INT64, TensorProto.INT32

    def init(name, arr):
        return numpy_helper.from_array(np.ascontiguousarray(arr), name)

    def const_node(out_name, arr):
        return helper.make_node("Constant", [], [out_name],
                                value=numpy_helper.from_array(np.asarray(arr), out_name + "_value"))

    def weights(seed, shape, fan_in, gain=1.0):
        r = np.random.default_rng(seed)
        return (r.standard_normal(shape) * (gain / math.sqrt(fan_in))).astype(np.float32)

    def bias(seed, n, scale=0.1):
        return (np.random.default_rng(seed).standard_normal(n) * scale).astype(np.float32)

    # shared decoder of the nchw family: [N,Zin] -> Gemm -> [N,32,4,4] -> ConvT -> [N,3,8,8]
    def nchw_decoder(zin, z_name, seed, prefix=""):
        W1 = weights(seed, (zin, 512), zin, 1.5)
        B1 = bias(seed + 1, 512)
        W2 = weights(seed + 2, (32, 3, 4, 4), 32 * 4, 1.5)
        B2 = bias(seed + 3, 3)
        inits = [init("fc.weight", W1), init("fc.bias", B1),
                 init("up.weight", W2), init("up.bias", B2)]
        nodes = [
            helper.make_node("Gemm", [z_name, "fc.weight", "fc.bias"], ["h0"], name="fc"),
            const_node("shape_n32x4x4", np.array([-1, 32, 4, 4], dtype=np.int64)),
            helper.make_node("Reshape", ["h0", "shape_n32x4x4"], ["h1"], name="reshape"),
            helper.make_node("Relu", ["h1"], ["h2"], name="relu"),
            helper.make_node("ConvTranspose", ["h2", "up.weight", "up.bias"], ["h3"], name="up",
                             kernel_shape=[4, 4], strides=[2, 2], pads=[1, 1, 1, 1]),
        ]
        params = {"W1": W1, "B1": B1, "W2": W2, "B2": B2}
        return nodes, inits, params

    def make(name, nodes, inits, inputs, outputs, value_info=()):
        g = helper.make_graph(nodes, name.replace("-", "_"), inputs, outputs, initializer=inits,
                              value_info=list(value_info))
        m = helper.make_model(g, opset_imports=[helper.make_opsetid("", OPSET)],
                              producer_name="genloom-tests", producer_version="1")
        m.ir_version = IR
        return m

    def vi(name, elem, shape):
        return helper.make_tensor_value_info(name, elem, shape)

    # ---- float64 NumPy forward passes, to cross-check the ReferenceEvaluator
    def np_convT(x, W, B, s, p):
        n, ci, h, w = x.shape
        _, co, kh, kw = W.shape
        full = np.zeros((n, co, (h - 1) * s + kh, (w - 1) * s + kw))
        for y in range(h):
            for xx in range(w):
                full[:, :, y * s:y * s + kh, xx * s:xx * s + kw] += np.einsum(
                    "nc,cokl->nokl", x[:, :, y, xx], W)
        ho, wo = (h - 1) * s - 2 * p + kh, (w - 1) * s - 2 * p + kw
        return full[:, :, p:p + ho, p:p + wo] + B[None, :, None, None]

    def np_nchw(zin, P):
        h = zin @ P["W1"].astype(np.float64) + P["B1"]
        h = np.maximum(h.reshape(-1, 32, 4, 4), 0)
        return np.tanh(np_convT(h, P["W2"].astype(np.float64), P["B2"].astype(np.float64), 2, 1))

    latents_rng = lambda rows, z: np.random.default_rng(99).standard_normal((rows, z)).astype(
        np.float32)

    manifest = []
    NCHW_MACS = 16 * 512 + 32 * 3 * 4 * 4 * 4 * 4

    def param_count(m):
        return int(sum(int(np.prod(t.dims)) for t in m.graph.initializer))

    def const_count(m):
        n = 0
        for node in m.graph.node:
            if node.op_type == "Constant":
                for a in node.attribute:
                    if a.name == "value":
                        n += int(np.prod(a.t.dims))
        return n

    def save_npy(fname, arr):
        with open(d / fname, "wb") as f:
            np.save(f, arr)

    def check(m, full=True):
        onnx.checker.check_model(m, full_check=full)

    def run_ref(model_or_path, feeds):
        sess = ReferenceEvaluator(model_or_path)
        res = sess.run(None, feeds)
        assert len(res) == 1 and res[0].dtype == np.float32
        return res[0]

    def entry(name, m, inputs, output, latent_dim, macs, **kw):
        e = {"name": name, "file": name + ".onnx", "opset": OPSET, "ir_version": IR,
             "inputs": inputs, "output": output, "latent_dim": latent_dim,
             "classes": kw.pop("classes", None), "conditioning": kw.pop("conditioning", None),
             "param_count": param_count(m) if m is not None else kw.pop("param_count"),
             "constant_node_elements": const_count(m) if m is not None else kw.pop("const"),
             "macs_per_sample": macs}
        e.update(kw)
        manifest.append(e)

    def inp(name, dtype, shape):
        return {"name": name, "dtype": dtype, "shape": shape}

    def outp(name, shape, layout, rng_):
        return {"name": name, "dtype": "float32", "shape": shape, "layout": layout, "range": rng_}

    def save_model(m, fname):
        with open(d / fname, "wb") as f:
            f.write(m.SerializeToString())

    # 1. nchw-tanh --------------------------------------------------------
    nodes, inits, P = nchw_decoder(16, "z", 1000)
    nodes.append(helper.make_node("Tanh", ["h3"], ["image"], name="tanh"))
    m_nchw = make("nchw-tanh", nodes, inits, [vi("z", FLOAT, ["N", 16])],
                  [vi("image", FLOAT, ["N", 3, 8, 8])])
    check(m_nchw)
    save_model(m_nchw, "nchw-tanh.onnx")
    z = latents_rng(5, 16)
    save_npy("nchw-tanh.latents.npy", z)
    ref_nchw = run_ref(m_nchw, {"z": z})
    assert ref_nchw.shape == (5, 3, 8, 8)
    assert np.allclose(ref_nchw, np_nchw(z.astype(np.float64), P), atol=1e-5)
    assert 0.05 < np.abs(ref_nchw).mean() < 0.95
    save_npy("nchw-tanh.onnxref.npy", ref_nchw)
    entry("nchw-tanh", m_nchw, [inp("z", "float32", ["N", 16])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          latents="nchw-tanh.latents.npy", latents_feed_shape=[5, 16], labels=None,
          onnxref="nchw-tanh.onnxref.npy", checker="full_check", expect="ok")

    # 2. z11-sigmoid-gray -------------------------------------------------
    W1 = weights(2000, (8, 16, 4, 4), 8, 1.5)
    B1 = bias(2001, 16)
    gamma = (1.0 + 0.3 * np.random.default_rng(2002).standard_normal(16)).astype(np.float32)
    beta = bias(2003, 16, 0.2)
    mean = bias(2004, 16, 0.3)
    var = (0.5 + np.random.default_rng(2005).random(16)).astype(np.float32)
    W2 = weights(2006, (16, 1, 4, 4), 16 * 4, 2.0)
    B2 = bias(2007, 1)
    inits = [init("up1.weight", W1), init("up1.bias", B1), init("bn.scale", gamma),
             init("bn.bias", beta), init("bn.mean", mean), init("bn.var", var),
             init("up2.weight", W2), init("up2.bias", B2)]
    nodes = [
        helper.make_node("ConvTranspose", ["latent", "up1.weight", "up1.bias"], ["h0"],
                         name="up1", kernel_shape=[4, 4], strides=[1, 1], pads=[0, 0, 0, 0]),
        helper.make_node("BatchNormalization", ["h0", "bn.scale", "bn.bias", "bn.mean", "bn.var"],
                         ["h1"], name="bn", epsilon=1e-5),
        helper.make_node("Relu", ["h1"], ["h2"], name="relu"),
        helper.make_node("ConvTranspose", ["h2", "up2.weight", "up2.bias"], ["h3"], name="up2",
                         kernel_shape=[4, 4], strides=[2, 2], pads=[1, 1, 1, 1]),
        helper.make_node("Sigmoid", ["h3"], ["out"], name="sigmoid"),
    ]
    m = make("z11-sigmoid-gray", nodes, inits, [vi("latent", FLOAT, ["N", 8, 1, 1])],
             [vi("out", FLOAT, ["N", 1, 8, 8])])
    check(m)
    save_model(m, "z11-sigmoid-gray.onnx")
    z = latents_rng(5, 8)
    save_npy("z11-sigmoid-gray.latents.npy", z)
    ref = run_ref(m, {"latent": z.reshape(5, 8, 1, 1)})
    zz = z.astype(np.float64).reshape(5, 8, 1, 1)
    h = np_convT(zz, W1.astype(np.float64), B1.astype(np.float64), 1, 0)
    h = (h - mean[None, :, None, None]) / np.sqrt(var[None, :, None, None] + 1e-5) \
        * gamma[None, :, None, None] + beta[None, :, None, None]
    h = np_convT(np.maximum(h, 0), W2.astype(np.float64), B2.astype(np.float64), 2, 1)
    assert ref.shape == (5, 1, 8, 8)
    assert np.allclose(ref, 1 / (1 + np.exp(-h)), atol=1e-5)
    save_npy("z11-sigmoid-gray.onnxref.npy", ref)
    entry("z11-sigmoid-gray", m, [inp("latent", "float32", ["N", 8, 1, 1])],
          outp("out", ["N", 1, 8, 8], "NCHW", "[0,1]"), 8,
          8 * 16 * 4 * 4 * 1 * 1 + 16 * 1 * 4 * 4 * 4 * 4,
          latents="z11-sigmoid-gray.latents.npy", latents_feed_shape=[5, 8, 1, 1], labels=None,
          onnxref="z11-sigmoid-gray.onnxref.npy", checker="full_check", expect="ok",
          note="latents file is (5,8); the model is fed it reshaped to [5,8,1,1]")

    # 3. nhwc-255-rgba ----------------------------------------------------
    W1 = weights(3000, (12, 144), 12, 1.5)
    B1 = bias(3001, 144)
    inits = [init("fc.weight", W1), init("fc.bias", B1)]
    nodes = [
        helper.make_node("Gemm", ["z", "fc.weight", "fc.bias"], ["h0"], name="fc"),
        const_node("shape_n4x6x6", np.array([-1, 4, 6, 6], dtype=np.int64)),
        helper.make_node("Reshape", ["h0", "shape_n4x6x6"], ["h1"], name="reshape"),
        helper.make_node("Tanh", ["h1"], ["h2"], name="tanh"),
        const_node("half_range", np.array(127.5, dtype=np.float32)),
        helper.make_node("Mul", ["h2", "half_range"], ["h3"], name="scale"),
        helper.make_node("Add", ["h3", "half_range"], ["h4"], name="shift"),
        helper.make_node("Transpose", ["h4"], ["pixels"], name="to_nhwc", perm=[0, 2, 3, 1]),
    ]
    m = make("nhwc-255-rgba", nodes, inits, [vi("z", FLOAT, ["N", 12])],
             [vi("pixels", FLOAT, ["N", 6, 6, 4])])
    check(m)
    save_model(m, "nhwc-255-rgba.onnx")
    z = latents_rng(5, 12)
    save_npy("nhwc-255-rgba.latents.npy", z)
    ref = run_ref(m, {"z": z})
    h = np.tanh((z.astype(np.float64) @ W1 + B1).reshape(-1, 4, 6, 6)) * 127.5 + 127.5
    assert ref.shape == (5, 6, 6, 4)
    assert np.allclose(ref, h.transpose(0, 2, 3, 1), atol=1e-3)
    save_npy("nhwc-255-rgba.onnxref.npy", ref)
    entry("nhwc-255-rgba", m, [inp("z", "float32", ["N", 12])],
          outp("pixels", ["N", 6, 6, 4], "NHWC", "[0,255]"), 12, 12 * 144,
          latents="nhwc-255-rgba.latents.npy", latents_feed_shape=[5, 12], labels=None,
          onnxref="nhwc-255-rgba.onnxref.npy", checker="full_check", expect="ok",
          note="the last op is Transpose (not Tanh/Sigmoid); 4 channels (RGBA)")

    # 4. fixed-batch ------------------------------------------------------
    nodes, inits, P = nchw_decoder(16, "z", 1000)
    nodes.append(helper.make_node("Tanh", ["h3"], ["image"], name="tanh"))
    m = make("fixed-batch", nodes, inits, [vi("z", FLOAT, [4, 16])],
             [vi("image", FLOAT, [4, 3, 8, 8])])
    check(m)
    save_model(m, "fixed-batch.onnx")
    z = latents_rng(4, 16)
    save_npy("fixed-batch.latents.npy", z)
    ref = run_ref(m, {"z": z})
    assert ref.shape == (4, 3, 8, 8)
    assert np.allclose(ref, np_nchw(z.astype(np.float64), P), atol=1e-5)
    save_npy("fixed-batch.onnxref.npy", ref)
    entry("fixed-batch", m, [inp("z", "float32", [4, 16])],
          outp("image", [4, 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          latents="fixed-batch.latents.npy", latents_feed_shape=[4, 16], labels=None,
          onnxref="fixed-batch.onnxref.npy", checker="full_check", expect="ok",
          note="batch fixed at 4; same weights as nchw-tanh; latents file has 4 rows")

    # 5. cond-index -------------------------------------------------------
    nodes, inits, P = nchw_decoder(16, "zc", 1000)
    emb = (np.random.default_rng(5000).standard_normal((5, 16)) * 0.8).astype(np.float32)
    inits = [init("embed.weight", emb)] + inits
    nodes = [
        helper.make_node("Gather", ["embed.weight", "label"], ["e"], name="embed", axis=0),
        helper.make_node("Add", ["z", "e"], ["zc"], name="condition"),
    ] + nodes + [helper.make_node("Tanh", ["h3"], ["image"], name="tanh")]
    m = make("cond-index", nodes, inits,
             [vi("z", FLOAT, ["N", 16]), vi("label", INT64, ["N"])],
             [vi("image", FLOAT, ["N", 3, 8, 8])])
    check(m)
    save_model(m, "cond-index.onnx")
    z = latents_rng(5, 16)
    lab = np.array([0, 1, 2, 3, 4], dtype=np.int64)
    save_npy("cond-index.latents.npy", z)
    save_npy("cond-index.labels.npy", lab)
    ref = run_ref(m, {"z": z, "label": lab})
    assert np.allclose(ref, np_nchw(z.astype(np.float64) + emb[lab], P), atol=1e-5)
    save_npy("cond-index.onnxref.npy", ref)
    entry("cond-index", m, [inp("z", "float32", ["N", 16]), inp("label", "int64", ["N"])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          classes=5, conditioning="index",
          latents="cond-index.latents.npy", latents_feed_shape=[5, 16],
          labels="cond-index.labels.npy", onnxref="cond-index.onnxref.npy",
          checker="full_check", expect="ok",
          note="Gather(embedding [5,16], label) added to z; Gather counts no MACs")

    # 6. cond-onehot ------------------------------------------------------
    nodes, inits, P = nchw_decoder(19, "zc", 6000)
    nodes = [helper.make_node("Concat", ["z", "onehot"], ["zc"], name="condition", axis=1)] \
        + nodes + [helper.make_node("Tanh", ["h3"], ["image"], name="tanh")]
    m = make("cond-onehot", nodes, inits,
             [vi("z", FLOAT, ["N", 16]), vi("onehot", FLOAT, ["N", 3])],
             [vi("image", FLOAT, ["N", 3, 8, 8])])
    check(m)
    save_model(m, "cond-onehot.onnx")
    z = latents_rng(5, 16)
    oh = np.eye(3, dtype=np.float32)[[0, 1, 2, 0, 1]]
    save_npy("cond-onehot.latents.npy", z)
    save_npy("cond-onehot.labels.npy", oh)
    ref = run_ref(m, {"z": z, "onehot": oh})
    assert np.allclose(ref, np_nchw(np.concatenate([z, oh], 1).astype(np.float64), P), atol=1e-5)
    save_npy("cond-onehot.onnxref.npy", ref)
    entry("cond-onehot", m, [inp("z", "float32", ["N", 16]), inp("onehot", "float32", ["N", 3])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16,
          19 * 512 + 32 * 3 * 4 * 4 * 4 * 4, classes=3, conditioning="onehot",
          latents="cond-onehot.latents.npy", latents_feed_shape=[5, 16],
          labels="cond-onehot.labels.npy", onnxref="cond-onehot.onnxref.npy",
          checker="full_check", expect="ok",
          note="labels file: float32 one-hot rows for classes [0,1,2,0,1]")

    # 7. wrong-declared-output -------------------------------------------
    nodes, inits, P = nchw_decoder(16, "z", 1000)
    nodes.append(helper.make_node("Tanh", ["h3"], ["image"], name="tanh"))
    m = make("wrong-declared-output", nodes, inits, [vi("z", FLOAT, ["N", 16])],
             [vi("image", FLOAT, ["N", 3, 16, 16])])
    checker_note = "full_check"
    try:
        check(m, full=True)
    except Exception as exc:  # strict shape inference sees 8 vs 16
        check(m, full=False)
        checker_note = ("check_model without full_check: full_check's strict shape inference "
                        "rejects the wrong declared shape (on purpose): %s"
                        % str(exc).strip().splitlines()[-1][:200])
    save_model(m, "wrong-declared-output.onnx")
    z = latents_rng(5, 16)
    save_npy("wrong-declared-output.latents.npy", z)
    ref = run_ref(m, {"z": z})
    assert ref.shape == (5, 3, 8, 8)
    assert np.array_equal(ref.view(np.uint32), ref_nchw.view(np.uint32))
    save_npy("wrong-declared-output.onnxref.npy", ref)
    entry("wrong-declared-output", m, [inp("z", "float32", ["N", 16])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          declared_output_shape=["N", 3, 16, 16],
          latents="wrong-declared-output.latents.npy", latents_feed_shape=[5, 16], labels=None,
          onnxref="wrong-declared-output.onnxref.npy", checker=checker_note,
          expect="refuse-or-trust-inferred:declared-shape-mismatch",
          note="same graph and weights as nchw-tanh; the graph output's declared shape "
               "[N,3,16,16] is wrong on purpose, the true (inferred) shape is [N,3,8,8]")

    # 8. external ---------------------------------------------------------
    data_path = d / "external.onnx.data"
    if data_path.exists():
        data_path.unlink()  # onnx appends to an existing data file
    m_ext = copy.deepcopy(m_nchw)
    m_ext.graph.name = "external"
    onnx.save_model(m_ext, str(d / "external.onnx"), save_as_external_data=True,
                    all_tensors_to_one_file=True, location="external.onnx.data", size_threshold=0)
    onnx.checker.check_model(str(d / "external.onnx"), full_check=True)
    m_ext_loaded = onnx.load(str(d / "external.onnx"), load_external_data=False)
    for t in m_ext_loaded.graph.initializer:
        assert t.data_location == TensorProto.EXTERNAL, t.name
    z = latents_rng(5, 16)
    save_npy("external.latents.npy", z)
    ref = run_ref(str(d / "external.onnx"), {"z": z})
    assert np.array_equal(ref.view(np.uint32), ref_nchw.view(np.uint32))
    save_npy("external.onnxref.npy", ref)
    entry("external", m_nchw, [inp("z", "float32", ["N", 16])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          external_data="external.onnx.data",
          latents="external.latents.npy", latents_feed_shape=[5, 16], labels=None,
          onnxref="external.onnxref.npy", checker="full_check (by path)", expect="ok",
          note="same weights as nchw-tanh, every initializer stored in external.onnx.data "
               "(size_threshold=0); the Reshape shape stays in a Constant node inside the model")

    # 9. external-escape / -absolute / -missing ---------------------------
    for name, loc, kind in [
        ("external-escape", "../escape.bin", "refuse:external-path-escape"),
        ("external-absolute", "/etc/hostname", "refuse:external-path-absolute"),
        ("external-missing", "missing.onnx.data", "refuse:external-file-missing"),
    ]:
        mm = copy.deepcopy(m_ext_loaded)
        mm.graph.name = name.replace("-", "_")
        for t in mm.graph.initializer:
            for kv in t.external_data:
                if kv.key == "location":
                    kv.value = loc
        save_model(mm, name + ".onnx")
        try:  # the onnx package itself refuses to load these
            onnx.load(str(d / (name + ".onnx")))
            raise AssertionError(name + " loaded")
        except onnx.checker.ValidationError:
            pass
        entry(name, m_nchw, [inp("z", "float32", ["N", 16])],
              outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
              external_data=loc, latents=None, labels=None, onnxref=None,
              checker="not run; onnx.load itself raises ValidationError for it", expect=kind,
              note="copy of external.onnx with every tensor's external-data location set to %r"
                   % loc)

    # 10. random-normal ---------------------------------------------------
    nodes, inits, P = nchw_decoder(16, "z", 1000)
    nodes.insert(1, helper.make_node("RandomNormalLike", ["h0"], ["noise"], name="noise",
                                     mean=0.0, scale=0.05))
    nodes.insert(2, helper.make_node("Add", ["h0", "noise"], ["h0n"], name="inject_noise"))
    for nd in nodes:
        if nd.op_type == "Reshape":
            nd.input[0] = "h0n"
    nodes.append(helper.make_node("Tanh", ["h3"], ["image"], name="tanh"))
    m = make("random-normal", nodes, inits, [vi("z", FLOAT, ["N", 16])],
             [vi("image", FLOAT, ["N", 3, 8, 8])])
    check(m)
    save_model(m, "random-normal.onnx")
    save_npy("random-normal.latents.npy", latents_rng(5, 16))
    entry("random-normal", m, [inp("z", "float32", ["N", 16])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          latents="random-normal.latents.npy", latents_feed_shape=[5, 16], labels=None,
          onnxref=None, checker="full_check", expect="flag:random-op",
          note="RandomNormalLike (no seed attribute) feeds an Add after the Gemm: the output is "
               "not a function of the latent alone; a release gate should flag it")

    # 11. z-int -----------------------------------------------------------
    nodes, inits, P = nchw_decoder(16, "zf", 1000)
    nodes = [helper.make_node("Cast", ["z"], ["zf"], name="cast", to=FLOAT)] + nodes \
        + [helper.make_node("Tanh", ["h3"], ["image"], name="tanh")]
    m = make("z-int", nodes, inits, [vi("z", INT32, ["N", 16])],
             [vi("image", FLOAT, ["N", 3, 8, 8])])
    check(m)
    save_model(m, "z-int.onnx")
    entry("z-int", m, [inp("z", "int32", ["N", 16])],
          outp("image", ["N", 3, 8, 8], "NCHW", "[-1,1]"), 16, NCHW_MACS,
          latents=None, labels=None, onnxref=None, checker="full_check",
          expect="refuse:latent-dtype",
          note="the latent input is int32 (Cast to float inside); a runtime must refuse it with "
               "a clear error")

    for e in manifest:
        p = d / e["file"]
        assert p.stat().st_size < 200 * 1024, e["file"]

    import onnx as _onnx
    write_json(d / "manifest.json", {
        "source": "onnx %s (onnx.helper, onnx.checker, onnx.reference.ReferenceEvaluator), "
                  "numpy %s" % (_onnx.__version__, NP_VER),
        "fields": {
            "inputs": "name, dtype, shape (\"N\" = symbolic batch)",
            "output": "name, dtype, true shape, layout NCHW|NHWC, range [-1,1]|[0,1]|[0,255]",
            "latent_dim": "the latent width Z (a [N,Z,1,1] input still has latent_dim Z)",
            "classes": "class count of a conditional model, else null",
            "conditioning": "index (int64 class ids) | onehot (float32 rows) | null",
            "param_count": "sum of element counts of the graph initializers",
            "constant_node_elements": "element count of Constant-node tensors (reshape "
                                      "targets, scalars); not included in param_count",
            "macs_per_sample": "multiply-accumulates per sample: Gemm in*out; ConvTranspose "
                               "C_in*C_out*kH*kW*H_in*W_in; Conv C_out*C_in/groups*kH*kW*H_out*"
                               "W_out; elementwise ops, Gather, BatchNormalization ignored",
            "latents": "float32 (rows, Z) latents from numpy default_rng(99).standard_normal",
            "latents_feed_shape": "shape the latents are fed to the model with",
            "labels": "conditioning input file (int64 [5] or float32 [5,3])",
            "onnxref": "float32 ReferenceEvaluator output for latents (+labels)",
            "expect": "ok | refuse:<reason> | flag:<reason> | refuse-or-trust-inferred:<reason>",
        },
        "models": manifest,
    })


# --------------------------------------------------------------------------
# driver
# --------------------------------------------------------------------------

def check_versions():
    bad = []
    for line in REQUIREMENTS.read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if "==" not in line:
            continue
        pkg, ver = [s.strip() for s in line.split("==", 1)]
        try:
            have = importlib.metadata.version(pkg)
        except importlib.metadata.PackageNotFoundError:
            have = None
        if have != ver:
            bad.append("%s: pinned %s, installed %s" % (pkg, ver, have))
    return bad


def generate(out):
    out.mkdir(parents=True, exist_ok=True)
    gen_philox4x64(out)
    gen_philox_gaussian(out)
    gen_randomstate(out)
    gen_interp(out)
    gen_truncnorm(out)
    gen_npy(out)
    gen_models(out)


def _listing(root):
    files = set()
    for p in root.rglob("*"):
        if p.is_dir():
            continue
        rel = p.relative_to(root)
        if "__pycache__" in rel.parts or rel.name.startswith("."):
            continue
        if len(rel.parts) == 1 and rel.name in NOT_GENERATED:
            continue
        if rel.parts[0] == "defects":  # made by defects/make_defects.py, checked by it
            continue
        files.add(rel.as_posix())
    return files


def run_check(committed):
    with tempfile.TemporaryDirectory(prefix="genloom-goldens-") as tmp:
        tmp = Path(tmp)
        generate(tmp)
        fresh = _listing(tmp)
        have = _listing(committed)
        problems = []
        for name in sorted(fresh | have):
            if name not in have:
                problems.append("missing (not committed): " + name)
            elif name not in fresh:
                problems.append("stale (not produced by the script): " + name)
            elif not filecmp.cmp(tmp / name, committed / name, shallow=False):
                problems.append("differs: " + name)
    for p in problems:
        print(p)
    if problems:
        print("golden check FAILED: %d file(s) differ" % len(problems))
        return 1
    print("golden check OK: %d files identical" % len(fresh))
    return 0


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, default=HERE,
                    help="output folder (default: the tests/golden folder itself)")
    ap.add_argument("--check", action="store_true",
                    help="regenerate into a temp dir and compare byte for byte with --out")
    ap.add_argument("--ignore-versions", action="store_true",
                    help="run even if installed packages differ from tests/requirements.txt")
    args = ap.parse_args(argv)
    bad = check_versions()
    if bad and not args.ignore_versions:
        for b in bad:
            print("version mismatch: " + b, file=sys.stderr)
        print("install tests/requirements.txt (pip install -r tests/requirements.txt) or pass "
              "--ignore-versions", file=sys.stderr)
        return 2
    out = args.out.resolve()
    if args.check:
        return run_check(out)
    generate(out)
    print("wrote golden data to %s" % out)
    return 0


if __name__ == "__main__":
    sys.exit(main())
