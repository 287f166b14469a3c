#!/usr/bin/python3
"""Generate the random-network reference set for tests/solver/scipy_reference_test.cpp.

What it does: for a fixed list of seeds, builds random stable RLC networks of 2 to 60
states (resistors, capacitors with esr/esl, inductors with dcr/rpar, one or two voltage
sources with step, pulse, points or sine waveforms and sums of them), about a third of them
stiff (element values spread over many decades; eigenvalue spans 1e6..7e11 in the
committed set), writes each as a ringdown netlist (random/netNN.rlc) and computes its
response at the output instants by this project's own, independent Python model
(rlc_model.py: MNA descriptor, index-1 reduction, exact matrix-exponential propagation
between corners), then writes the samples (random/netNN.csv, 15 significant digits) and a manifest (random/manifest.csv).

References (library versions are checked at start-up and written to the manifest):
  - non-stiff networks: scipy 1.10.1 scipy.linalg.expm of the input-augmented matrix;
  - stiff networks (span > STIFF_SPAN): mpmath 1.2.1 expm at rlc_model.MP_DIGITS digits,
    the reduction and DC point also in mpmath;
  - cross-checks written to the manifest: scipy.signal.lsim (exact for the piecewise-linear
    inputs whose corners fall on samples, the 'pwl' category), scipy.integrate.solve_ivp
    (DOP853, rtol 1e-12, integrated corner to corner) for the non-stiff sine/jump ones, and
    for stiff ones the error a plain double-precision expm would have had.

What it does not: touch ringdown. Run it with /usr/bin/python3 (Debian's numpy/scipy/mpmath);
it rewrites the random/ folder. Takes a few minutes on one core.
"""
from __future__ import annotations

import os
import sys
from decimal import Decimal
from fractions import Fraction

import mpmath
import numpy as np
import scipy
import scipy.integrate
import scipy.signal

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import rlc_model as rm  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "random")
STIFF_SPAN = 1e6        # above this eigenvalue span the reference is computed in mpmath
LSIM_SANITY = 1e-10     # lsim must agree this well on non-stiff 'pwl' networks (exact there)
IVP_SANITY = 1e-8       # DOP853 at rtol 1e-12 must agree this well (its own error ~1e-11)

# (size, spread, category, initial_dc, sources): spread is the half-width in decades of the
# element value distribution (0.5: mild, non-stiff; 2..3.5: stiff, with an eigenvalue span
# of at least min_span(spread, size)).
PLAN = [
    (2, 0.5, "pwl", True, 1), (2, 2.5, "jump", True, 1), (3, 0.5, "sine", True, 1),
    (3, 3.0, "pwl", True, 1), (4, 0.5, "jump0", True, 1), (4, 0.5, "pwl", False, 1),
    (5, 2.0, "sine", True, 1), (6, 0.5, "jump", True, 2), (6, 3.5, "pwl", True, 1),
    (7, 0.5, "sine", False, 1), (8, 0.5, "pwl", True, 2), (9, 2.5, "jump", True, 1),
    (10, 0.5, "pwl", True, 1), (10, 3.5, "sine", True, 1), (11, 0.5, "jump", True, 1),
    (12, 0.5, "sine", True, 2), (14, 2.0, "pwl", False, 1), (15, 0.5, "pwl", True, 1),
    (16, 0.5, "jump0", True, 1), (18, 3.5, "jump", True, 1), (20, 0.5, "sine", True, 1),
    (20, 2.5, "pwl", True, 2), (22, 0.5, "pwl", True, 1), (24, 0.5, "jump", False, 1),
    (25, 3.0, "sine", True, 1), (26, 0.5, "pwl", True, 1), (28, 0.5, "sine", True, 2),
    (30, 3.0, "jump", True, 1), (33, 0.5, "pwl", True, 1), (36, 0.5, "jump", True, 1),
    (40, 0.5, "sine", True, 1), (40, 2.0, "pwl", True, 1), (44, 0.5, "pwl", False, 2),
    (48, 0.5, "jump", True, 1), (52, 0.5, "sine", True, 1), (56, 0.5, "pwl", True, 1),
    (60, 0.5, "jump", True, 2), (60, 0.5, "pwl", True, 1),
]
BASE_SEED = 20240600
MAX_SPAN = 1e14         # the engine's design range goes to 1e15 (STIFF.md); stay inside it


def min_span(spread, size):
    """Required eigenvalue span of a stiff entry: 1e6 at spread 2, 1e8 at 2.5, 1e10 at 3,
    1e11 at 3.5; small networks rarely reach those, so at most 1e6 (<= 3 states) or 1e8
    (<= 6 states) there."""
    if spread <= 1:
        return 0.0
    want = {2.0: 1e6, 2.5: 1e8, 3.0: 1e10, 3.5: 1e11}[spread]
    return min(want, 1e6 if size <= 3 else 1e8 if size <= 6 else want)


def value_spread(spread):
    # the 3.5 entries draw from a wider distribution to reach their span in few attempts
    return spread + 0.5 if spread >= 3.5 else spread


def log_uniform(rng, center, decades):
    return center * 10 ** rng.uniform(-decades, decades)


def clip_value(kind, v):
    # Stay inside NETLIST.md's plausibility band (no warnings) and the SI prefix range.
    lo, hi = {"R": (1e-5, 1e11), "C": (1e-17, 0.1), "L": (1e-14, 5.0)}[kind]
    return min(max(v, lo), hi)


class Forest:
    def __init__(self, n):
        self.p = list(range(n))
    def find(self, i):
        while self.p[i] != i:
            self.p[i] = self.p[self.p[i]]; i = self.p[i]
        return i
    def join(self, a, b):
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.p[ra] = rb
        return True


def structure(rng, size, spread, nsrc):
    """Random network with a resistor spanning tree (every node has a DC path to gnd),
    a capacitor forest (no capacitor loops) and an inductor forest (no inductor loops;
    the source nodes count as gnd there). Sources sit behind a series R or L."""
    z0 = 10 ** rng.uniform(1, 3)          # impedance level, Ohm
    t0 = 10 ** rng.uniform(-7, -4)        # time level, s
    val = {
        "R": lambda: clip_value("R", log_uniform(rng, z0, spread)),
        "C": lambda: clip_value("C", log_uniform(rng, t0 / z0, spread)),
        "L": lambda: clip_value("L", log_uniform(rng, t0 * z0, spread)),
    }
    n_l = int(round(size * rng.uniform(0.25, 0.5))) if size > 1 else 0
    if size == 2:
        n_l = int(rng.integers(0, 2))
    n_c = size - n_l
    n_src_l = sum(1 for _ in range(nsrc) if n_l > 0 and rng.random() < 0.3)
    n_src_l = min(n_src_l, n_l)
    n_esl = int(rng.integers(0, 2)) if (n_l - n_src_l) >= 2 and n_c >= 2 else 0
    n_plain_l = n_l - n_src_l - n_esl
    n_nodes = max(2, n_c + int(rng.integers(1, 4)))
    n_plain_l = min(n_plain_l, n_nodes - 1)
    n_c = size - n_plain_l - n_src_l - n_esl     # rebalance after the clamp
    n_nodes = max(n_nodes, n_c + 1)
    name = lambda v: "gnd" if v == 0 else f"n{v}"
    parts, counters = [], {"R": 0, "C": 0, "L": 0, "V": 0}
    def add(kind, a, b, value, **kw):
        counters[kind] += 1
        unit = {"R": "Ohm", "C": "F", "L": "H"}.get(kind, "") if rng.random() < 0.5 else ""
        p = rm.Part(kind, f"{kind}{counters[kind]}", a, b, rm.dec(value), unit=unit, **kw)
        parts.append(p)
        return p
    # Resistor spanning tree over gnd + nodes, then a few extra resistors.
    order = list(rng.permutation(np.arange(1, n_nodes + 1)))
    placed = [0]
    for v in order:
        add("R", name(int(v)), name(int(rng.choice(placed))), val["R"]())
        placed.append(int(v))
    for _ in range(n_nodes // 3):
        a, b = rng.choice(n_nodes + 1, 2, replace=False)
        add("R", name(int(a)), name(int(b)), val["R"]())
    # Capacitor forest.
    f = Forest(n_nodes + 1)
    caps = 0
    while caps < n_c:
        a = int(rng.integers(1, n_nodes + 1))
        b = 0 if rng.random() < 0.5 else int(rng.integers(0, n_nodes + 1))
        if a == b or not f.join(a, b):
            continue
        kw = {}
        if rng.random() < 0.15:
            kw["esr"] = rm.dec(clip_value("R", log_uniform(rng, z0 * 1e-2, 1)))
        if n_esl > 0 and caps < n_esl:
            kw["esl"] = rm.dec(clip_value("L", log_uniform(rng, t0 * z0 * 1e-2, 1)))
            kw.setdefault("esr", rm.dec(clip_value("R", log_uniform(rng, z0 * 1e-2, 1))))
        add("C", name(a), name(b), val["C"](), **kw)
        caps += 1
    # Inductor forest (gnd vertex 0; sources are tied to gnd through their V).
    f = Forest(n_nodes + 1)
    inds, tries = 0, 0
    while inds < n_plain_l and tries < 10000:
        tries += 1
        a = int(rng.integers(1, n_nodes + 1))
        b = int(rng.integers(0, n_nodes + 1))
        if a == b or not f.join(a, b):
            continue
        kw = {}
        if rng.random() < 0.25:
            kw["dcr"] = rm.dec(clip_value("R", log_uniform(rng, z0 * 1e-2, 1)))
        if rng.random() < 0.1:
            kw["rpar"] = rm.dec(clip_value("R", log_uniform(rng, z0 * 30, 1)))
        add("L", name(a), name(b), val["L"](), **kw)
        inds += 1
    assert inds == n_plain_l
    sources = []
    for k in range(nsrc):
        node_in = f"in{k + 1}"
        target = name(int(rng.integers(1, n_nodes + 1)))
        if k < n_src_l:
            t = int(rng.integers(1, n_nodes + 1))
            # series inductor from the source (tied to gnd by its V): keep the forest.
            target = name(t) if f.join(t, 0) else None
        if k < n_src_l and target is not None:
            add("L", node_in, target, val["L"](),
                dcr=rm.dec(clip_value("R", log_uniform(rng, z0 * 1e-1, 1))))
        else:
            if target is None:   # could not place the series L (the state count check retries)
                target = name(int(rng.integers(1, n_nodes + 1)))
            add("R", node_in, target, val["R"]())
        src = add("V", node_in, "gnd", 0)
        sources.append(src)
    return parts, sources, n_nodes


def nice_step(h):
    """Largest 1, 2 or 5 x 10^k not above h, as a Decimal."""
    e = int(np.floor(np.log10(h)))
    for m in (5, 2, 1):
        if m * 10.0 ** e <= h * (1 + 1e-12):
            return Decimal(m).scaleb(e)
    return Decimal(1).scaleb(e)


def level(rng, lo=0.5, hi=20.0):
    return rm.dec(rng.uniform(lo, hi) * (1 if rng.random() < 0.8 else -1), 4)


def even(rng, lo, hi):
    lo, hi = max(lo, 0), max(hi, lo + 2)
    return 2 * int(rng.integers(lo // 2, hi // 2 + 1))


def waveform(rng, category, end, h_dec):
    """A waveform whose corners fit the category: 'pwl' corners on samples (even ticks,
    continuous: lsim is exact), 'jump' jumps between samples (odd ticks), 'jump0' a jump at
    t = 0, 'sine' damped/undamped sines (start at 0 or between samples)."""
    if category == "pwl":
        kind = rng.choice(["step", "pulse", "points", "sum"])
        if kind == "step":
            return rm.Step(level(rng), level(rng), even(rng, end // 20, end // 3),
                           even(rng, 2, end // 10))
        if kind == "pulse":
            period = even(rng, end // 8, end // 3)
            rise, fall = even(rng, 2, period // 8), even(rng, 2, period // 8)
            width = even(rng, 0, period - rise - fall)
            count = None if rng.random() < 0.5 else int(rng.integers(2, 5))
            return rm.Pulse(level(rng, 0, 2), level(rng), period, width, rise, fall,
                            even(rng, 0, end // 5), count)
        if kind == "points":
            ts = sorted(set(even(rng, 0, end) for _ in range(5)))
            return rm.Points([(t, level(rng)) for t in ts])
        return rm.Sum([rm.Const(level(rng)),
                       rm.Step(Decimal(0), level(rng), even(rng, 2, end // 3),
                               even(rng, 2, end // 8))])
    if category == "jump0":
        return rm.Step(Decimal(0), level(rng), 0, 0)
    if category == "jump":
        if rng.random() < 0.5:
            return rm.Step(level(rng), level(rng), even(rng, 2, end // 3) + 1, 0)
        period = even(rng, end // 8, end // 3)
        rise = 0 if rng.random() < 0.5 else even(rng, 2, period // 8)
        fall = 0 if rng.random() < 0.5 else even(rng, 2, period // 8)
        width = even(rng, 2, period - rise - fall - 2)
        return rm.Pulse(Decimal(0), level(rng), period, width, rise, fall,
                        even(rng, 2, end // 5) + 1, None if rng.random() < 0.5 else 3)
    # sine: frequency a few to tens of samples per period, sometimes decaying.
    per = float(rng.uniform(8, 60))
    freq = rm.dec(1.0 / (per * float(h_dec)), 6)
    start = 0 if rng.random() < 0.6 else even(rng, 2, end // 4) + 1
    tau = rm.dec(float(h_dec) * rng.uniform(20, 200), 4) if rng.random() < 0.4 else None
    s = rm.Sine(freq, rm.dec(rng.uniform(0.5, 10), 4), rm.dec(rng.uniform(-2, 2), 3),
                rm.dec(rng.uniform(-3, 3), 4), start, tau)
    if rng.random() < 0.3:
        return rm.Sum([rm.Const(level(rng)), s])
    return s


def candidates(parts):
    out = []
    for p in parts:
        for nd in (p.a, p.b):
            if nd.startswith("n") and nd not in out:
                out.append(nd)
    for p in parts:
        if p.kind == "L":
            out.append(p.name + ".i")
            if p.rpar is not None:
                out.append(p.name + ".il")
        if p.kind == "C" and p.esr is not None:
            out.append(p.name + ".vc")
    return out


def rel_err(y, ref):
    peak = np.max(np.abs(ref), axis=0)
    return float(np.max(np.max(np.abs(y - ref), axis=0) / peak))


def ivp_check(c, ss):
    """DOP853 from breakpoint to breakpoint (samples and corners) on x' = A x + B u(t),
    u taken as its smooth piece on each interval; outputs at the samples."""
    q = c.q
    srcs = c.sources()
    bps = set(range(0, c.end + 1, 2))
    for s in srcs:
        bps |= {t for t in s.wave.corners(c.end) if 0 < t < c.end}
    bps = sorted(bps)
    def u_full(tick):
        return np.array([s.wave.value(Fraction(tick), q) for s in srcs])
    x = ss.x0.copy()
    scale = float(np.max(np.abs(ss.x0))) if np.any(ss.x0) else 1.0
    out = [ss.C @ x + ss.D @ u_full(0)]
    for ta, tb in zip(bps, bps[1:]):
        mid = Fraction(ta + tb, 2)
        lin0 = np.array([s.wave.lin(Fraction(ta)) for s in srcs])
        slope = np.array([s.wave.dlin(mid) / q for s in srcs])
        oscs = [(j, o) for j, s in enumerate(srcs) for o in s.wave.osc() if o.start <= ta]
        def f(t, xx):
            u = lin0 + slope * (t - ta * q)
            for j, o in oscs:
                tau = t - o.start * q
                u[j] += o.amp * np.exp(-o.sigma * tau) * np.sin(o.omega * tau + o.phase)
            return ss.A @ xx + ss.B @ u
        sol = scipy.integrate.solve_ivp(f, (ta * q, tb * q), x, method="DOP853", rtol=1e-12,
                                        atol=1e-14 * scale)
        x = sol.y[:, -1]
        if tb % 2 == 0:
            out.append(ss.C @ x + ss.D @ u_full(tb))
    return np.array(out)


def build(idx, plan):
    size, spread, category, initial_dc, nsrc = plan
    seed = BASE_SEED + idx
    rng = np.random.default_rng(seed)
    for attempt in range(400):
        parts, sources, n_nodes = structure(rng, size, value_spread(spread), nsrc)
        for s in sources:
            s.wave = rm.Const(Decimal(1))
        c = rm.Circuit("", Decimal("1e-6"), 10, parts, [], initial_dc)
        cands = candidates(parts)
        m = rm.build_mna(c, cands)
        states = len(m.caps) + m.n_ind
        if states != size:
            continue
        try:  # screen in double, then confirm in mpmath for the stiff ones
            ss = rm.reduce(m, c, cands, precise=False)
            fast, slow, rate = rm.eig_span(ss)
            if spread > 1 and rate > 0 and min_span(spread, size) <= fast / slow <= MAX_SPAN:
                ss = rm.reduce(m, c, cands, precise=True)
                fast, slow, rate = rm.eig_span(ss)
        except (np.linalg.LinAlgError, ZeroDivisionError, ValueError):
            continue
        span = fast / slow
        if not (rate > 0) or span > MAX_SPAN or span < min_span(spread, size) \
                or (spread <= 1 and span > STIFF_SPAN) or rate < 1e-3 * slow:
            continue
        break
    else:
        raise RuntimeError(f"net{idx:02d}: no acceptable network in 400 attempts")
    span = fast / slow
    stiff = span > STIFF_SPAN
    n_samples = int(rng.integers(300, 401))
    until = rng.uniform(3, 6) / rate
    h = nice_step(until / n_samples)
    c.quantum = h / 2
    c.samples = n_samples
    for s in sources:
        s.wave = waveform(rng, category, c.end, h)
    ss = rm.reduce(m, c, cands, precise=stiff)
    times, Y, lengths = rm.simulate(c, ss, use_mp=stiff)
    # choose the records: signals that move and are not negligible for their kind
    peaks = np.max(np.abs(Y), axis=0)
    pp = np.ptp(Y, axis=0)
    is_i = np.array([("." in s and not s.endswith(".vc")) for s in cands])
    ok = []
    for k, s in enumerate(cands):
        same = peaks[is_i == is_i[k]]
        if peaks[k] > 0 and peaks[k] >= 1e-3 * same.max() and pp[k] >= 1e-2 * peaks[k]:
            ok.append(k)
    volt = [k for k in ok if not is_i[k]]
    curr = [k for k in ok if is_i[k]]
    pick = list(rng.permutation(volt))[: int(rng.integers(2, 4))] + \
        list(rng.permutation(curr))[: int(rng.integers(1, 3))]
    pick = sorted(int(k) for k in pick)
    if len(pick) < 2:
        pick = sorted(set(pick) | set(int(k) for k in np.argsort(-peaks)[:2]))
    c.records = [cands[k] for k in pick]
    Yr = Y[:, pick]
    src_desc = "; ".join(f"{s.name}: {s.wave.text(c.T)}" for s in sources)
    c.title = f"random network {idx:02d}: {size} states, {'stiff' if stiff else 'non-stiff'}"
    c.comment = (f"Generated by tests/reference/gen_random_networks.py (seed {seed}); do not edit.\n"
                 f"{size} states, eigenvalue span {span:.2e}, category {category}; reference "
                 f"{'mpmath expm' if stiff else 'scipy.linalg.expm'} (random/net{idx:02d}.csv).")
    # Cross-checks.
    ssr = rm.StateSpace(ss.A, ss.B, ss.C[pick], ss.D[pick], ss.x0, c.records)
    lsim_err = ""
    if category == "pwl":
        U = rm.input_samples(c)
        _, yl, _ = scipy.signal.lsim((ssr.A, ssr.B, ssr.C, ssr.D), U, times, X0=ssr.x0)
        lsim_err = rel_err(np.asarray(yl).reshape(Yr.shape), Yr)
        if not stiff and lsim_err > LSIM_SANITY:
            raise RuntimeError(f"net{idx:02d}: lsim disagrees by {lsim_err:.2e}")
    ivp_err = ""
    if not stiff and category != "pwl" and size <= 30:
        yi = ivp_check(c, ssr)
        ivp_err = rel_err(yi, Yr)
        if ivp_err > IVP_SANITY:
            raise RuntimeError(f"net{idx:02d}: DOP853 disagrees by {ivp_err:.2e}")
    dbl_err = ""
    if stiff:
        ssd = rm.StateSpace(ss.A, ss.B, ss.C[pick], ss.D[pick], ss.x0, c.records)
        _, Yd, _ = rm.simulate(c, ssd, use_mp=False)
        dbl_err = rel_err(Yd, Yr)
    name = f"net{idx:02d}"
    with open(os.path.join(OUT, name + ".rlc"), "w") as fh:
        fh.write(c.netlist())
    with open(os.path.join(OUT, name + ".csv"), "w") as fh:
        fh.write("time," + ",".join(c.records) + "\n")
        for t, row in zip(times, Yr):
            fh.write(f"{t:.15g}," + ",".join(f"{v:.15g}" for v in row) + "\n")
    fmt = lambda v: v if v == "" else f"{v:.2e}"
    row = [name, str(seed), str(size), str(len(sources)), category,
           "dc" if initial_dc else "zero", f"{span:.3e}", str(n_samples), str(len(c.records)),
           "mpmath-expm" if stiff else "scipy-expm", fmt(lsim_err), fmt(ivp_err), fmt(dbl_err)]
    print(" ".join(f"{x:>11}" for x in row), flush=True)
    return row


def main():
    assert scipy.__version__.startswith("1.10"), scipy.__version__
    os.makedirs(OUT, exist_ok=True)
    only = {int(a) for a in sys.argv[1:]}
    header = ["name", "seed", "states", "sources", "category", "initial", "span", "samples",
              "signals", "reference", "lsim_rel_err", "dop853_rel_err", "double_expm_rel_err"]
    print(" ".join(f"{x:>11}" for x in header))
    rows = []
    for idx, plan in enumerate(PLAN):
        if only and idx not in only:
            continue
        rows.append(build(idx, plan))
    if only:
        return
    with open(os.path.join(OUT, "manifest.csv"), "w") as fh:
        fh.write(f"# numpy {np.__version__}, scipy {scipy.__version__}, mpmath "
                 f"{mpmath.__version__}; generated by gen_random_networks.py\n")
        fh.write(",".join(header) + "\n")
        for r in rows:
            fh.write(",".join(r) + "\n")


if __name__ == "__main__":
    main()
