#!/usr/bin/python3
"""Python side of the benchmark (bench/run_bench.sh drives it; not a test).

What it does:
  write DIR    writes the bench circuits as ringdown netlists into DIR, from the same
               Python objects (tests/reference/rlc_model.py) that give the state space here,
               so ringdown and scipy solve the same system.
  compare DIR  times scipy 1.10 on the same systems and samples: scipy.signal.lsim on the
               4-state snubber (1e6 samples), the 200-state ladder (1e4) and the 1000-state
               ladder (2000); scipy.integrate.solve_ivp(method="Radau", rtol=1e-8) on the
               snubber; numpy.savetxt of the snubber's rows (a CSV-writing baseline). Computes
               the exact snubber response (mpmath 1.2.1 expm of the input-augmented matrix at
               34 digits, propagated in double) and the errors of ringdown, lsim and Radau
               against it. Reads engine_bench's figures (DIR/engine.txt, DIR/*.bin) and the CSV
               timings (DIR/csv.txt), and prints one table in which every figure is a ratio
               against a baseline measured in the same run.
  lsim DIR NAME  only the lsim call on one case (for /usr/bin/time -v memory figures).

What it does not: build or run ringdown (run_bench.sh does), or check anything (no
pass/fail: the targets are printed beside the ratios).
"""
from __future__ import annotations

import os
import sys
import time
from decimal import Decimal

import mpmath
import numpy as np
import scipy
import scipy.integrate
import scipy.signal

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests",
                                "reference"))
import rlc_model as rm  # noqa: E402

D = Decimal


def snubber(samples=1_000_000, dc=False):
    """Switch node with an RC snubber (common practice, no source: snubber R near
    sqrt(Lk/Coss) = 14.6 Ohm, snubber C about 3x Coss): a 48 V, 100 kHz trapezoid drives the
    leakage inductance Lk into the drain capacitance Coss, the output inductor feeds the load.
    4 states: Lk.il, Coss.v, Csn.v, Lout.il. Output step 2 ns (the ringing is at 23 MHz);
    corners on samples so that lsim's linear interpolation is exact."""
    c = rm.Circuit("switch node with RC snubber", D("1e-9"), samples, initial_dc=not dc)
    if dc:
        wave = rm.Const(D(48))
    else:   # ticks of 1 ns: period 10 us, rise/fall 10 ns, width 4.98 us, start 1 us
        wave = rm.Pulse(D(0), D(48), 10000, 4980, 10, 10, 1000)
    c.parts = [
        rm.Part("V", "Vsw", "sw", "gnd", wave=wave),
        rm.Part("L", "Lk", "sw", "drain", D("100e-9"), dcr=D("0.02")),
        rm.Part("C", "Coss", "drain", "gnd", D("470e-12")),
        rm.Part("R", "Rsn", "drain", "mid", D("15")),
        rm.Part("C", "Csn", "mid", "gnd", D("1.5e-9")),
        rm.Part("L", "Lout", "drain", "out", D("10e-6"), dcr=D("0.05")),
        rm.Part("R", "Rload", "out", "gnd", D("10")),
    ]
    c.records = ["drain", "Lk.i", "out"]
    return c


def ladder(sections, every_ns, samples):
    """LC ladder: 50 Ohm source, `sections` x (1 uH series, 400 pF shunt: Z0 = 50 Ohm,
    20 ns per section), 50 Ohm load; a 1 V dc source switched on at t = 0 (initial=zero),
    which lsim's interpolation represents exactly. 2 x sections states."""
    q = D(every_ns) * D("1e-9") / 2
    c = rm.Circuit(f"LC ladder, {sections} sections", q, samples, initial_dc=False)
    c.parts = [rm.Part("V", "V1", "in", "gnd", wave=rm.Const(D(1))),
               rm.Part("R", "Rs", "in", "n0", D(50))]
    for k in range(1, sections + 1):
        c.parts.append(rm.Part("L", f"L{k}", f"n{k - 1}", f"n{k}", D("1e-6")))
        c.parts.append(rm.Part("C", f"C{k}", f"n{k}", "gnd", D("400e-12")))
    c.parts.append(rm.Part("R", "Rload", f"n{sections}", "gnd", D(50)))
    c.records = [f"n{sections // 2}", f"n{sections}", "L1.i"]
    return c


def cases():
    return {
        "snubber4": snubber(),
        "snubber4_dc": snubber(1_000_000, dc=True),
        "ladder200": ladder(100, 2, 10_000),
        "ladder1000": ladder(500, 10, 2000),
    }


# The 1,000-cycle pulse train on the 200-state ladder: 20 ns period over 1e4 samples of
# 2 ns, corners between samples (rise 1 ns, width 7.3 ns, fall 1.1 ns).
PULSE_TRAIN = "pulse(low=0, high=1, period=20n, width=7.3n, rise=1n, fall=1.1n)"


def write(d):
    os.makedirs(d, exist_ok=True)
    for name, c in cases().items():
        with open(os.path.join(d, name + ".rlc"), "w") as fh:
            fh.write(c.netlist())
    text = cases()["ladder200"].netlist()
    line = next(l for l in text.splitlines() if l.startswith("voltage"))
    pulsed = text.replace(line, line.rsplit(None, 1)[0] + " " + PULSE_TRAIN)
    pulsed = pulsed.replace('title "LC ladder, 100 sections"',
                            'title "LC ladder, 100 sections, 1000-cycle pulse train"')
    with open(os.path.join(d, "ladder200_pulse.rlc"), "w") as fh:
        fh.write(pulsed)


def model(c, precise=False):
    m = rm.build_mna(c, c.records)
    return rm.reduce(m, c, c.records, precise=precise)


def pulse_samples(p: rm.Pulse, end_tick: int):
    """Vectorised pulse value at the even ticks 0, 2, ..., end (corners on samples)."""
    t = np.arange(0, end_tick + 1, 2, dtype=np.int64)
    lo, hi = float(p.low), float(p.high)
    tau = (t - p.start) % p.period
    u = np.full(t.shape, lo)
    up = tau < p.rise
    u[up] = lo + (hi - lo) * tau[up] / p.rise
    top = (tau >= p.rise) & (tau < p.rise + p.width)
    u[top] = hi
    down = (tau >= p.rise + p.width) & (tau < p.rise + p.width + p.fall)
    u[down] = hi - (hi - lo) * (tau[down] - p.rise - p.width) / p.fall
    u[t < p.start] = lo
    return u


def inputs(c):
    w = c.sources()[0].wave
    if isinstance(w, rm.Pulse):
        return pulse_samples(w, c.end)[:, None]
    return np.full((c.samples + 1, 1), w.lin(0))


def times(c):
    return np.arange(c.samples + 1) * (2 * c.q)


def exact_snubber(c, ss_mp, U):
    """Exact samples: E = expm([[A, B, 0], [0, 0, 1], [0, 0, 0]] h) in mpmath (34 digits),
    then x_{k+1} = E [x_k; u_k; u_{k+1} - u_k] in double (first-order hold, exact for a
    piecewise-linear input with corners on the samples)."""
    mpmath.mp.dps = rm.MP_DIGITS
    n = ss_mp.A.shape[0]
    h = mpmath.mpf(2) * mpmath.mpf(str(c.quantum))
    M = rm.augmented(ss_mp.mp["A"], ss_mp.mp["B"], [], [], mpmath.mpf(0), mpmath.mpf(1), 1 / h)
    Em = mpmath.expm(mpmath.matrix([[v * h for v in row] for row in M.tolist()]))
    E = np.array([[float(Em[i, j]) for j in range(M.shape[0])] for i in range(n)])
    Phi, g0, g1 = E[:, :n], E[:, n], E[:, n + 1]
    u = U[:, 0]
    drive = np.outer(u[:-1], g0) + np.outer(u[1:] - u[:-1], g1)
    X = np.empty((len(u), n))
    x = ss_mp.x0.copy()
    X[0] = x
    PhiT = Phi.T.copy()
    for k in range(len(u) - 1):
        x = x @ PhiT + drive[k]
        X[k + 1] = x
    return X @ ss_mp.C.T + np.outer(u, ss_mp.D[:, 0])


# Radau in pure Python costs about 1 ms of CPU per sample period of the ringing here: the
# full 1e6 samples would take minutes on a shared machine, so by default it runs the first
# RADAU_SAMPLES samples (20 of the 200 pulse periods; the input is periodic, so the cost per
# period is steady) and its time is scaled to the whole run. RADAU_SAMPLES=1000000 runs all.
RADAU_SAMPLES = int(os.environ.get("RADAU_SAMPLES", "100000"))


def radau_snubber(c, ss, U, samples):
    """solve_ivp Radau, rtol 1e-8, atol 1e-10, exact Jacobian, restarted at every corner of
    the pulse (the fair use of an error-controlled integrator on a piecewise input), over
    samples 0..`samples`."""
    w = c.sources()[0].wave
    end = 2 * samples
    corners = sorted({t for t in w.corners(end) if 0 < t < end} | {0, end})
    q, hf = c.q, 2 * c.q
    A, B = ss.A, ss.B[:, 0]
    x = ss.x0.copy()
    out = np.empty((samples + 1, len(x)))
    out[0] = x
    for ta, tb in zip(corners, corners[1:]):
        u0 = w.lin(ta)
        slope = w.dlin((ta + tb) / 2) / q
        k0, k1 = ta // 2 + 1, tb // 2          # samples strictly after ta, up to tb
        t_eval = np.arange(k0, k1 + 1) * hf
        sol = scipy.integrate.solve_ivp(
            lambda t, xx: A @ xx + B * (u0 + slope * (t - ta * q)), (ta * q, tb * q), x,
            method="Radau", rtol=1e-8, atol=1e-10, jac=A, t_eval=t_eval)
        out[k0:k1 + 1] = sol.y.T
        x = sol.y[:, -1]
    return out @ ss.C.T + np.outer(U[:samples + 1, 0], ss.D[:, 0])


def rel_err(y, ref):
    return float(np.max(np.max(np.abs(y - ref), axis=0) / np.max(np.abs(ref), axis=0)))


def read_kv(path):
    out = {}
    if not os.path.exists(path):
        return out
    for line in open(path):
        fields = dict(f.split("=", 1) for f in line.split() if "=" in f)
        if "case" in fields:
            out[fields["case"]] = fields
        elif "matvec" in fields:
            out["matvec" + fields["matvec"]] = fields
        elif "key" in fields:
            out[fields["key"]] = fields
    return out


def read_dump(d, name, signals):
    path = os.path.join(d, name + ".bin")
    if not os.path.exists(path):
        return None
    raw = np.fromfile(path, dtype=np.float64)
    return raw.reshape(-1, signals + 1)[:, 1:]


def timed(f):
    t0 = time.perf_counter()
    r = f()
    return time.perf_counter() - t0, r


# lsim is timed as the engine is: the best of this many runs (engine_bench --reps 3).
LSIM_REPS = 3


def best_of(f, reps=LSIM_REPS):
    best, r = timed(f)
    for _ in range(reps - 1):
        t, r = timed(f)
        best = min(best, t)
    return best, r


def compare(d):
    eng = read_kv(os.path.join(d, "engine.txt"))
    csvt = read_kv(os.path.join(d, "csv.txt"))
    cs = cases()
    rows = []   # (figure, ringdown, baseline, ratio text, target)
    f = lambda s: f"{s:.3g} s"

    def engine_s(name):
        return float(eng[name]["engine_s"]) if name in eng else None

    def ratio(base, mine):
        return f"{base / mine:.1f}x" if mine and base else "n/a"

    # (a) snubber, 1e6 samples
    c = cs["snubber4"]
    ss = model(c)
    ssm = model(c, precise=True)
    U = inputs(c)
    T = times(c)
    t_lsim, (_, y_lsim, _) = best_of(lambda: scipy.signal.lsim((ss.A, ss.B, ss.C, ss.D), U, T, X0=ss.x0))
    k_radau = min(RADAU_SAMPLES, c.samples)
    t_radau, y_radau = timed(lambda: radau_snubber(c, ss, U, k_radau))
    t_radau *= c.samples / k_radau
    y_exact = exact_snubber(c, ssm, U)
    e_lsim = rel_err(y_lsim, y_exact)
    e_radau = rel_err(y_radau, y_exact[:k_radau + 1])
    y_ring = read_dump(d, "snubber4", len(c.records))
    e_ring = rel_err(y_ring, y_exact) if y_ring is not None and y_ring.shape == y_exact.shape else None
    er = engine_s("snubber4")
    rows.append(("(a) snubber, 4 states, 1e6 samples: vs scipy.signal.lsim (best of 3 each)",
                 f(er) if er else "n/a", f(t_lsim), ratio(t_lsim, er), ">= 100x"))
    radau_note = "" if k_radau == c.samples else f", first {k_radau} samples, time x{c.samples / k_radau:g}"
    rows.append((f"(a) same: vs solve_ivp Radau rtol=1e-8 (restarted at corners{radau_note})",
                 f(er) if er else "n/a", f(t_radau), ratio(t_radau, er), ">= 50x"))
    rows.append(("(a) error vs exact (mpmath expm), of peak: Radau / ringdown",
                 f"{e_ring:.2e}" if e_ring is not None else "n/a", f"{e_radau:.2e}",
                 f"{e_radau / e_ring:.3g}x" if e_ring else ("exact" if e_ring == 0 else "n/a"),
                 ">= 100x"))
    rows.append(("(a) error vs exact, of peak: lsim / ringdown",
                 f"{e_ring:.2e}" if e_ring is not None else "n/a", f"{e_lsim:.2e}",
                 f"{e_lsim / e_ring:.3g}x" if e_ring else "n/a", "(info)"))
    # (b), (c) ladders
    for name, label, target in (("ladder200", "(b) LC ladder, 200 states, 1e4 samples", ">= 10x"),
                                ("ladder1000", "(c) LC ladder, 1000 states, 2000 samples", ">= 5x")):
        c = cs[name]
        t_model, ss = timed(lambda: model(c))
        U, T = inputs(c), times(c)
        t_l, (_, y_l, _) = best_of(lambda: scipy.signal.lsim((ss.A, ss.B, ss.C, ss.D), U, T, X0=ss.x0),
                                   LSIM_REPS if name == "ladder200" else 1)
        er = engine_s(name)
        reps = "best of 3 each" if name == "ladder200" else "one run each"
        rows.append((label + f": vs scipy.signal.lsim ({reps})", f(er) if er else "n/a", f(t_l),
                     ratio(t_l, er), target))
        y_r = read_dump(d, name, len(c.records))
        if y_r is not None and y_r.shape == np.shape(y_l):
            rows.append((f"    {name}: ringdown vs lsim agreement, of peak", "", "",
                         f"{rel_err(y_r, y_l):.1e}", "(info)"))
    # (d) per-sample propagation against a bare dense matrix-vector product
    for name, n, kind, target in (("snubber4_dc", 5, "fixed", "<= 2x"),
                                  ("ladder200", 200, "dynamic", "<= 1.5x"),
                                  ("ladder1000", 1000, "dynamic", "<= 1.5x")):
        key = f"matvec{n}"
        if name in eng and "marginal_s" in eng[name] and key in eng:
            per = float(eng[name]["marginal_s"])
            mv = float(eng[key]["seconds"])
            # per = 0: T(2N) - T(N) was lost in the timing noise of the set-up
            rows.append((f"(d) per-sample cost, n={n} ({name}) / Eigen {kind} matvec",
                         f"{per * 1e9:.1f} ns" if per > 0 else "noise", f"{mv * 1e9:.1f} ns",
                         f"{per / mv:.2f}x" if per > 0 else "n/a", target))
        else:
            rows.append((f"(d) per-sample cost, n={n} ({name}) / Eigen {kind} matvec",
                         "n/a", "n/a", "n/a", target))
    # (e) pulse train vs dc on the 200-state ladder
    ep, ed = engine_s("ladder200_pulse"), engine_s("ladder200")
    rows.append(("(e) 1000-cycle pulse train / dc source, ladder 200, 1e4 samples",
                 f(ep) if ep else "n/a", f(ed) if ed else "n/a",
                 f"{ep / ed:.2f}x" if ep and ed else "n/a", "< 2x"))
    # parse time, CSV writing
    lines = []
    for name in ("snubber4", "ladder1000"):
        if name in eng:
            p, e = float(eng[name]["parse_s"]), float(eng[name]["engine_s"])
            lines.append(f"parse time {name}: {p * 1e3:.2f} ms "
                         f"({p / e:.3f}x of its engine time {e:.3g} s)")
    c = cs["snubber4"]
    rows_csv = c.samples + 1
    if "csv" in csvt and "nocsv" in csvt:
        tc, tn = float(csvt["csv"]["seconds"]), float(csvt["nocsv"]["seconds"])
        arr = np.column_stack([times(c), y_exact])
        path = os.path.join(d, "savetxt.csv")
        t_np, _ = timed(lambda: np.savetxt(path, arr, fmt="%.12g", delimiter=",",
                                           header="time," + ",".join(c.records), comments=""))
        os.remove(path)
        rate = rows_csv / max(tc - tn, 1e-9)
        lines.append(f"CSV writing (ringdown run --csv, snubber4, {rows_csv} rows x "
                     f"{len(c.records) + 1} columns): {rate:,.0f} rows/s (run with CSV "
                     f"{tc:.2f} s, without {tn:.2f} s); numpy.savetxt same rows: "
                     f"{rows_csv / t_np:,.0f} rows/s; ratio {rate / (rows_csv / t_np):.2f}x")
    else:
        lines.append("CSV writing: n/a (ringdown binary not found)")
    mem = read_kv(os.path.join(d, "memory.txt"))
    for k, v in sorted(mem.items()):
        lines.append(f"memory {k}: max RSS {int(v['kb']) / 1024:.1f} MiB")
    print(f"\nringdown vs scipy {scipy.__version__} / numpy {np.__version__} "
          f"(mpmath {mpmath.__version__} for the exact reference), one run")
    w = max(len(r[0]) for r in rows)
    print(f"{'figure':<{w}}  {'ringdown':>12}  {'baseline':>12}  {'ratio':>10}  target")
    for r in rows:
        print(f"{r[0]:<{w}}  {r[1]:>12}  {r[2]:>12}  {r[3]:>10}  {r[4]}")
    for l in lines:
        print(l)


def lsim_only(d, name):
    c = cases()[name]
    ss = model(c)
    U, T = inputs(c), times(c)
    t, _ = timed(lambda: scipy.signal.lsim((ss.A, ss.B, ss.C, ss.D), U, T, X0=ss.x0))
    print(f"lsim {name}: {t:.3f} s")


if __name__ == "__main__":
    if len(sys.argv) >= 3 and sys.argv[1] == "write":
        write(sys.argv[2])
    elif len(sys.argv) >= 3 and sys.argv[1] == "compare":
        compare(sys.argv[2])
    elif len(sys.argv) >= 4 and sys.argv[1] == "lsim":
        lsim_only(sys.argv[2], sys.argv[3])
    else:
        sys.exit("usage: lsim_bench.py write DIR | compare DIR | lsim DIR CASE")
