"""The machine's limit for a force evaluation: an operation count against measured peak rates.

Two small C++ programs are compiled on the fly (g++, cached in the temporary directory by a hash of
their source, the engine headers and the flags):

- kernels/peak.cpp: independent fused multiply-adds (scalar and 4-wide), scalar division and square
  root rates, in thread CPU time;
- kernels/force.cpp: the engine's own force kernel and Stormer substep (cpp/include, the engine's
  flags) for f64, dd and qd, and the cost of single dd/qd operations.

The operation counts below are floating-point instructions (add, sub, mul, fma, div, sqrt: one each;
compares, selects and sign flips not counted), counted by hand from the algorithms in
cpp/include/loschmidt/scalar/ (double_double.hpp: JMP 2017 Alg. 6 / 12 / 18 and the Newton sqrt;
quad_double.hpp: the Hida-Li-Bailey accurate add with its renormalization, the truncated product,
and the precision-doubling division and square root). The qd counts are estimates: qd addition has
data-dependent paths; the count assumes every accumulate step runs. The limit assumes every
instruction issues at the measured scalar FMA rate; the engine's extended-precision code is scalar.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import subprocess
import tempfile
from pathlib import Path

__all__ = ["OPS", "ops_per_pair", "ops_per_evaluation", "measure", "engine_root"]

HERE = Path(__file__).resolve().parent
KERNELS = HERE / "kernels"

#: Floating-point instructions per operation (see the module docstring).
OPS = {
    "f64": {"add": 1, "mul": 1, "div": 1, "sqrt": 1, "rsqrt": 2},
    # dd: TwoSum 6, FastTwoSum 3, TwoProd (fma) 2.  add = 2 TwoSum + 2 FastTwoSum + 2 = 20;
    # mul = TwoProd + mul + 2 fma + add + FastTwoSum = 9; div (Alg. 18) = div + fma + mul + FastTwoSum
    # + dd*fp (6) + dd+fp (10) + dd*dd (9) = 31; sqrt = sqrt + fma + add + mul + div + FastTwoSum = 8.
    # rsqrt = sqrt + div + 3 TwoProd + TwoSum + 2 FastTwoSum + 9 plain = 31 (double_double.hpp).
    "dd": {"add": 20, "mul": 9, "div": 31, "sqrt": 8, "rsqrt": 31},
    # qd [estimate]: add = the no-cancellation path (7 TwoSum + 3 adds + renormalization: 4 TwoSum
    # and up to 4 FastTwoSum) = 81 (the merge path under cancellation: ~120); mul = 6 TwoProd + 12
    # plain order-3/4 terms + 8 TwoSum + 11 adds + renorm. = 107; div (one Newton correction) = 2 dd
    # divisions + qd*dd product + qd add + conversions + join = 310; sqrt = dd sqrt + qd*dd product +
    # qd add + dd div + conversions + join = 280; rsqrt = dd rsqrt + qd*dd and qd products + qd+fp +
    # dd mul + join = 330.
    "qd": {"add": 81, "mul": 107, "div": 310, "sqrt": 280, "rsqrt": 330},
}


def ops_per_pair(precision: str, dims: int = 3) -> int:
    """One pair term of the engine's force kernel (nbody/forces.hpp) in ``dims`` dimensions:
    D subtractions, D products and D - 1 sums for r^2, one sqrt, r^2 * r, 1 / (r^2 r), m_j q and
    m_i q, and for each component two products and two accumulations. (The chain method's kernel,
    chain_coordinates.hpp, uses one inverse square root instead: benchmarks/speed.py counts it.)"""
    o = OPS[precision]
    adds = dims + (dims - 1) + 2 * dims
    muls = dims + 1 + 2 + 2 * dims
    return adds * o["add"] + muls * o["mul"] + o["div"] + o["sqrt"]


def ops_per_evaluation(precision: str, n: int = 3, dims: int = 3, substep: bool = True) -> int:
    """A whole force evaluation of n bodies (pairs plus the per-body sums), and with ``substep`` the
    Stormer update that goes with it: per coordinate x0 + dx, dv += h a, dx += h (v0 + dv)
    (three sums and two products)."""
    o = OPS[precision]
    pairs = n * (n - 1) // 2
    force = pairs * ops_per_pair(precision, dims) + n * dims * o["add"]
    update = n * dims * (3 * o["add"] + 2 * o["mul"]) if substep else 0
    return force + update


def engine_root() -> Path | None:
    """The source tree's root (with cpp/include), when benchmarks/ sits in it."""
    root = HERE.parent
    return root if (root / "cpp" / "include" / "loschmidt").is_dir() else None


def _compile(source: Path, flags: list[str], extra_inputs: list[Path]) -> tuple[Path | None, str]:
    gxx = shutil.which("g++")
    if gxx is None:
        return None, "g++ not found: machine limit not measured"
    h = hashlib.sha256()
    h.update(source.read_bytes())
    h.update(" ".join(flags).encode())
    for p in extra_inputs:
        h.update(p.read_bytes())
    cache = Path(tempfile.gettempdir()) / "loschmidt-bench"
    cache.mkdir(exist_ok=True)
    exe = cache / f"{source.stem}-{h.hexdigest()[:16]}"
    if exe.exists():
        return exe, "cached"
    tmp = exe.with_suffix(f".tmp{os.getpid()}")
    cmd = [gxx, *flags, "-o", str(tmp), str(source)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=1800)  # loaded machines compile slowly
    if proc.returncode != 0:
        return None, f"compile failed: {' '.join(cmd)}\n{proc.stderr[-2000:]}"
    tmp.replace(exe)
    return exe, "compiled"


def _run(exe: Path) -> dict:
    proc = subprocess.run([str(exe)], capture_output=True, text=True, timeout=300)
    if proc.returncode != 0:
        raise RuntimeError(f"{exe.name} failed: {proc.stderr[-500:]}")
    return json.loads(proc.stdout)


def measure(hardware_fma: bool = True) -> dict:
    """Peak rates, engine kernel costs and the operation-count limits; a 'notes' list says what was
    skipped. ``hardware_fma``: whether the engine was built with -mfma (``loschmidt._core.hardware_fma``)."""
    out: dict = {"notes": []}
    base = ["-O3", "-std=c++17", "-ffp-contract=off", "-fno-fast-math", "-Wall", "-Wextra"]
    fma = ["-mfma"] if hardware_fma else []
    exe, how = _compile(KERNELS / "peak.cpp", base + ["-mfma", "-fno-tree-vectorize", "-fno-tree-slp-vectorize"], [])
    if exe is None:
        out["notes"].append(how)
        return out
    out["peak"] = _run(exe)
    root = engine_root()
    if root is None:
        out["notes"].append("engine headers (cpp/include) not found beside benchmarks/: kernel costs not measured")
    else:
        headers = sorted((root / "cpp" / "include").rglob("*.hpp"))
        flags = base + fma + (["-DLOSCHMIDT_HW_FMA=1"] if hardware_fma else []) + ["-I", str(root / "cpp" / "include")]
        exe2, how2 = _compile(KERNELS / "force.cpp", flags, headers)
        if exe2 is None:
            out["notes"].append(how2)
        else:
            out["kernels"] = _run(exe2)
    rate = out["peak"]["scalar_fma_per_s"]
    limits = {}
    for prec in ("f64", "dd", "qd"):
        row = {}
        for dims in (2, 3):
            force_ops = ops_per_evaluation(prec, 3, dims, substep=False)
            sub_ops = ops_per_evaluation(prec, 3, dims, substep=True)
            row[f"D{dims}"] = {
                "ops_per_pair": ops_per_pair(prec, dims),
                "force_ops": force_ops,
                "substep_ops": sub_ops,
                "force_limit_ns": 1e9 * force_ops / rate,
                "substep_limit_ns": 1e9 * sub_ops / rate,
            }
        limits[prec] = row
    # f64 also waits on its division and square root unit: 3 of each per evaluation of 3 bodies
    pk = out["peak"]
    divsqrt = 1e9 * 3 * (1 / pk["div_per_s"] + 1 / pk["sqrt_per_s"])
    for dims in (2, 3):
        d = limits["f64"][f"D{dims}"]
        d["divsqrt_limit_ns"] = divsqrt
        d["force_limit_ns"] = max(d["force_limit_ns"], divsqrt)
        d["substep_limit_ns"] = max(d["substep_limit_ns"], divsqrt)
    out["limits"] = limits
    return out
