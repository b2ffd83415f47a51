"""The C++ unit programs of cpp/tests/, built and run by the test suite so CI runs them.

Each program is a plain main() that checks the engine headers against things outside the project
(exact Kepler solutions, conservation laws, published values; the sources are named in the
programs) and exits non-zero on a failed check. Here each is compiled with the module's numerical
flags (C++17, -Wall -Wextra, -ffp-contract=off, never fast-math, -mfma when compiler and CPU run it,
as CMakeLists.txt decides) into pytest's temporary folder, run, and must exit 0 and print its
pass line. Compiling dominates the cost (measured on the shared 2-core x86_64 machine, CPU
seconds: compile 41 at -O1 against 63 at -O2, running 8 at either), so the programs are built at
-O1 rather than the module's -O3, all at once over the CPUs; the numerics do not depend on the
level (IEEE basic operations, sqrt and fma only, contraction off, no fast-math). Skipped, with
the reason, only when no C++ compiler is found.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SOURCES = ROOT / "cpp" / "tests"
INCLUDE = ROOT / "cpp" / "include"

# The module's numerical flags (CMakeLists.txt); -O1: see the module docstring.
FLAGS = ["-std=c++17", "-O1", "-Wall", "-Wextra", "-ffp-contract=off", "-fno-fast-math", "-pthread"]

# program -> the line it prints when every check passed
PASS_LINES = {
    "test_scalar": re.compile(r"^\d+ passed, 0 failed$", re.MULTILINE),
    "test_gbs": re.compile(r"^all checks passed \(0 failures\)$", re.MULTILINE),
    "test_chain": re.compile(r"^all chain tests passed ", re.MULTILINE),
    "test_capabilities": re.compile(r"^all capability tests passed$", re.MULTILINE),
}


def _compiler() -> str | None:
    for name in (os.environ.get("CXX"), "g++", "clang++", "c++"):
        if name and shutil.which(name):
            return shutil.which(name)
    return None


def _fma_flags(cxx: str, tmp: Path) -> list[str]:
    """-mfma when this compiler accepts it and this CPU runs a fused multiply-add (as CMakeLists.txt)."""
    src = tmp / "fma_probe.cpp"
    src.write_text(
        "#include <cmath>\n"
        "int main() { volatile double a = 1.0 + 0x1p-30, b = 1.0 - 0x1p-30; double p = a * b;\n"
        "  return std::fma((double)a, (double)b, -p) == -0x1p-60 ? 0 : 1; }\n"
    )
    exe = tmp / "fma_probe"
    built = subprocess.run([cxx, "-std=c++17", "-O1", "-mfma", "-ffp-contract=off", str(src), "-o", str(exe)],
                           capture_output=True, text=True)
    if built.returncode != 0:
        return []
    try:
        ran = subprocess.run([str(exe)], capture_output=True, timeout=30)
    except OSError:
        return []
    return ["-mfma"] if ran.returncode == 0 else []


@pytest.fixture(scope="module")
def build(tmp_path_factory: pytest.TempPathFactory) -> dict[str, tuple[Path, str]]:
    """Every program compiled at once, in parallel over the CPUs: name -> (executable, error text)."""
    cxx = _compiler()
    if cxx is None:
        pytest.skip("no C++ compiler found (looked for $CXX, g++, clang++, c++)")
    tmp = tmp_path_factory.mktemp("cpp_programs")
    flags = FLAGS + _fma_flags(cxx, tmp)

    def compile_program(name: str) -> tuple[Path, str]:
        exe = tmp / name
        cmd = [cxx, *flags, "-I", str(INCLUDE), str(SOURCES / f"{name}.cpp"), "-o", str(exe)]
        out = subprocess.run(cmd, capture_output=True, text=True)
        return exe, "" if out.returncode == 0 else f"{' '.join(cmd)}\n{out.stderr}"

    with ThreadPoolExecutor(max_workers=max(1, os.cpu_count() or 1)) as pool:
        return dict(zip(PASS_LINES, pool.map(compile_program, PASS_LINES)))


def test_every_program_is_run_here() -> None:
    assert sorted(p.stem for p in SOURCES.glob("test_*.cpp")) == sorted(PASS_LINES)


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(PASS_LINES))
def test_program(build, name: str, tmp_path: Path) -> None:
    exe, error = build[name]
    assert not error, error
    out = subprocess.run([str(exe)], capture_output=True, text=True, cwd=tmp_path, timeout=900)
    assert out.returncode == 0, f"{name} failed:\n{out.stdout[-4000:]}\n{out.stderr[-2000:]}"
    assert PASS_LINES[name].search(out.stdout), f"{name}: no pass line in\n{out.stdout[-2000:]}"
