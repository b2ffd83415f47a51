"""Determinism: the same inputs give the same bits across runs, processes, thread counts and
executors, and the bits themselves are pinned.

The pins are SHA-256 digests (first 16 hex digits) of the final limbs of four short runs, recorded
on 2026-12-01 on x86_64 Linux (gcc 12, glibc). The engine uses only IEEE-754 basic operations,
sqrt and fma (correctly rounded everywhere), with contraction off and no fast-math, so the digests
do not depend on the machine or on whether fma is hardware or library (DEVELOPERS.md). A failing
pin means the numerics changed: update it only on purpose, and say why in the commit.
Thread counts and executors (local threads, concurrent.futures, Dask) are compared in
test_batch.py and test_sweep.py; this file adds fresh processes and the pins.
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
import textwrap

import numpy as np

PROGRAM = textwrap.dedent(
    """
    import hashlib, json, numpy as np, loschmidt
    from loschmidt import ics

    def h(*arrays):
        d = hashlib.sha256()
        for a in arrays:
            d.update(np.ascontiguousarray(a, dtype="<f8").tobytes())
        return d.hexdigest()[:16]

    s = ics.pythagorean(precision="dd")
    gbs = loschmidt.integrate(s, 5, method="gbs")  # explicit: the default is now automatic (chain for 3 bodies)
    chain = loschmidt.integrate(s, 5, method="chain")
    batch = loschmidt.roundtrip_batch(ics.free_fall_grid(3, 3), 2, precision="f64", method="chain", threads=THREADS)
    triple = ics.hierarchical(inner=dict(m1=0.5, m2=0.4, a=1, e=0.5),
                              outer=dict(m3=0.3, a=6, e=0.1, inclination=0.3), precision="qd")
    pn = loschmidt.integrate(triple, 2, method="chain", pn=(1, 2, 2.5), c=15)
    print(json.dumps({
        "gbs_dd": h(gbs.system.limbs("positions"), gbs.system.limbs("velocities")),
        "chain_dd": h(chain.system.limbs("positions"), chain.system.limbs("velocities")),
        "batch_f64": h(batch.returned_positions, batch.forward_velocities),
        "pn_qd": h(pn.system.limbs("positions"), pn.system.limbs("velocities")),
    }))
    """
)

PINNED = {
    "gbs_dd": "861494ffb1ad7b10",    # Pythagorean problem, t = 5, gbs, dd, default tolerance
    "chain_dd": "0ce3b93ff075c57c",  # the same with the chain method
    "batch_f64": "45be571dbc204734",  # round trips of a 3 x 3 free-fall grid, t = 2, chain, f64
    "pn_qd": "18eb375876758b18",     # hierarchical triple with 1PN + 2PN + 2.5PN, t = 2, qd
}


def _run(threads: int) -> dict:
    out = subprocess.run([sys.executable, "-c", PROGRAM.replace("THREADS", str(threads))], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_fresh_processes_and_thread_counts_give_the_pinned_bits() -> None:
    one, two = _run(1), _run(2)
    assert one == two  # run to run, process to process, 1 or 2 threads
    assert one == PINNED


def test_repeated_calls_in_one_process_are_identical() -> None:
    import loschmidt
    from loschmidt import ics

    s = ics.pythagorean(precision="f64c")
    a = loschmidt.integrate(s, 3, method="chain")
    b = loschmidt.integrate(s, 3, method="chain")
    assert np.array_equal(a.system.limbs("positions"), b.system.limbs("positions"))
    assert (a.steps, a.evaluations) == (b.steps, b.evaluations)
    digest = hashlib.sha256(a.system.limbs("velocities").tobytes()).hexdigest()
    assert digest == hashlib.sha256(b.system.limbs("velocities").tobytes()).hexdigest()
