"""Speed of the design prediction: 10 000 grid points x 20 loudspeakers.

Run by hand:  python benchmarks/bench_design.py

Goal: the whole grid (modelled MTF, speech levels, noise, masking, threshold, STI) in
under 1 s on one core. The reference, measured in the same run, is a plain numpy
evaluation of the same formula: every (loudspeaker, point, band, modulation frequency)
term broadcast at once, m = |sum (D + R / (1 + j 2 pi F T / 13.8)) exp(-j 2 pi F t)| /
sum (D + R), then the same STI arithmetic. The two must agree to 1e-9.
"""

from __future__ import annotations

import os
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")       # one core
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from envpredict import standards as std  # noqa: E402
from envpredict.design import predict_design  # noqa: E402
from envpredict.roommodel import parse_scene  # noqa: E402
from envpredict.sti import sti_many  # noqa: E402


def best_of(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def scene() -> dict:
    """A 100 m x 100 m hall, two lines of ten aimed loudspeakers, a 1 m grid (100 x 100 points)."""
    sources = [{"name": f"LS{i + 1}", "position_m": [5 + 10 * (i % 10), 25 if i < 10 else 75, 6],
                "aim_m": [5 + 10 * (i % 10), 35 if i < 10 else 65, 1.2], "level_1m_dba": 82,
                "q": [1.5, 2, 3, 5, 8, 10, 12], "delay_ms": 5.0 * (i % 10)} for i in range(20)]
    return {"room": {"volume_m3": 80000, "rt_s": [2.4, 2.2, 2.0, 1.8, 1.6, 1.3, 1.0]},
            "noise_db": [58, 55, 52, 49, 45, 40, 33], "sources": sources,
            "grid": {"x_m": [0.5, 99.5], "y_m": [0.5, 99.5], "z_m": 1.2, "step_m": 1.0}}


def plain_numpy(sc) -> np.ndarray:
    """The same formula, broadcast over (source, point, band, modulation frequency)."""
    pts = sc.grid.points()
    f = np.asarray(std.MODULATION_FREQUENCIES_HZ)
    T = sc.room.rt_s
    A = 0.161 * sc.room.volume_m3 / T
    pos = np.array([s.position_m for s in sc.sources])
    axis = np.array([(s.aim_m - s.position_m) / np.linalg.norm(s.aim_m - s.position_m) for s in sc.sources])
    i1 = 10.0 ** (np.array([s.level_1m_db for s in sc.sources]) / 10.0)
    q = np.array([s.q for s in sc.sources])
    delay = np.array([s.delay_ms for s in sc.sources]) / 1000.0
    v = pts[None, :, :] - pos[:, None, :]                      # (S, P, 3)
    r = np.linalg.norm(v, axis=-1)                             # (S, P)
    cos = np.einsum("spc,sc->sp", v, axis) / r
    g = ((1 + cos[:, :, None]) / 2) ** (q[:, None, :] - 1)     # (S, P, 7)
    D = i1[:, None, :] * g / r[:, :, None] ** 2
    R = np.broadcast_to((i1 * 16 * np.pi / (q * A))[:, None, :], D.shape)
    t = r / 343.0 + delay[:, None]
    H = 1 / (1 + 1j * 2 * np.pi * f[None, :] * T[:, None] / 13.8)            # (7, F)
    E = np.exp(-1j * 2 * np.pi * f[None, None, :] * t[:, :, None])          # (S, P, F)
    num = ((D[..., None] + R[..., None] * H[None, None]) * E[:, :, None, :]).sum(axis=0)   # (P, 7, F)
    tot = (D + R).sum(axis=0)
    mtf = np.abs(num) / tot[:, :, None]
    return sti_many(mtf, 10 * np.log10(tot), sc.noise_db).reshape(sc.grid.y_m.size, sc.grid.x_m.size)


def main():
    d = scene()
    sc = parse_scene(d)
    ours = predict_design(sc).grid.sti                          # warm-up and values
    ref = plain_numpy(sc)
    diff = float(np.max(np.abs(ours - ref)))
    t_ref = best_of(lambda: plain_numpy(sc), 3)
    t_ours = best_of(lambda: predict_design(sc), 5)
    t_all = best_of(lambda: predict_design(d), 3)
    print(f"grid {sc.grid.x_m.size} x {sc.grid.y_m.size} = {ours.size} points, {len(sc.sources)} loudspeakers, "
          "one thread")
    print(f"plain numpy broadcast of the same formula: {1000 * t_ref:8.1f} ms")
    print(f"envpredict predict_design (checked scene):  {1000 * t_ours:8.1f} ms   (with the scene check: "
          f"{1000 * t_all:.1f} ms)")
    print(f"ratio ours / plain numpy: {t_ours / t_ref:.2f}x; largest STI difference {diff:.1e}")
    print(f"goal: under 1 s -> {'met' if t_all < 1.0 else 'NOT met'}")
    if diff > 1e-9:
        raise SystemExit("the two evaluations disagree")


if __name__ == "__main__":
    main()
