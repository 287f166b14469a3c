"""rlc_model: an independent Python model of a subset of ringdown's circuit language.

What it does: holds a small circuit (resistors, capacitors with esr/esl, inductors with
dcr/rpar, voltage sources driven by constant, step, pulse, points and sine waveforms and
their sums), writes it as a ringdown netlist (.rlc, NETLIST.md) and, by its own code,
builds the modified-nodal-analysis (MNA) descriptor C x' + G x = B u, reduces it to a state
space x_s' = A x_s + B_s u, y = C_s x_s + D_s u, finds the DC operating point, and
computes the response exactly at the output instants (the matrix exponential of the state
augmented with the input generators, between every pair of waveform corners).

What it does not: share anything with ringdown's C++ code, handle capacitor loops,
inductor loops or cuts, couplings, switches, current or controlled sources. The generators
(gen_random_networks.py, bench/lsim_bench.py) only build circuits this model handles and
check that they do.

Precision: the reduction, the DC point and, for stiff networks, the matrix exponential are
done in mpmath at MP_DIGITS digits (the element values are the same doubles ringdown
parses, so only rounding at the end separates the two). Non-stiff networks may use
scipy.linalg.expm in double (scipy 1.10.1, Debian 12).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from decimal import Decimal
from fractions import Fraction
from typing import Optional

import mpmath
import numpy as np
import scipy.linalg

MP_DIGITS = 34  # mpmath working digits: > 2x double, enough for spans to 1e15 (STIFF.md)

# SI prefixes of NETLIST.md section 2, by power of ten.
PREFIXES = {-18: "a", -15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k",
            6: "M", 9: "G", 12: "T"}


def si(value: Decimal) -> str:
    """Exact decimal text with an SI prefix: Decimal('4.7E3') -> '4.7k'."""
    value = Decimal(value)
    if value == 0:
        return "0"
    sign = "-" if value < 0 else ""
    v = abs(value)
    g = max(-18, min(12, (v.adjusted() // 3) * 3))
    m = v.scaleb(-g).normalize()
    return sign + format(m, "f") + PREFIXES[g]


def dec(x: float, digits: int = 6) -> Decimal:
    """A float rounded to `digits` significant decimal digits, as an exact Decimal."""
    return Decimal(f"{x:.{digits - 1}e}").normalize()


# --- Waveforms ----------------------------------------------------------------
# Time is counted in integer ticks of a decimal quantum q (the sample step is 2 ticks),
# so corners, samples and their differences are exact. lin(t) is the piecewise-linear
# part (right-continuous), dlin(t) its slope per tick at a non-corner t, osc() the
# damped-sine parts (amp, omega, phase, sigma, start tick) that add to it from `start`.

@dataclass
class Osc:
    amp: float
    omega: float
    phase: float
    sigma: float
    start: int  # tick


class Waveform:
    def text(self, T) -> str: raise NotImplementedError
    def corners(self, end: int) -> list: return []
    def lin(self, t: Fraction) -> float: raise NotImplementedError
    def dlin(self, t: Fraction) -> float: return 0.0
    def osc(self) -> list: return []

    def value(self, t: Fraction, q: float) -> float:
        """Full value at tick t (right-continuous)."""
        v = self.lin(t)
        for o in self.osc():
            if t >= o.start:
                tau = float(t - o.start) * q
                v += o.amp * math.exp(-o.sigma * tau) * math.sin(o.omega * tau + o.phase)
        return v


@dataclass
class Const(Waveform):
    v: Decimal
    def text(self, T): return si(self.v)
    def lin(self, t): return float(self.v)


@dataclass
class Step(Waveform):
    frm: Decimal
    to: Decimal
    at: int
    rise: int = 0
    def text(self, T):
        return f"step(from={si(self.frm)}, to={si(self.to)}, at={T(self.at)}, rise={T(self.rise)})"
    def corners(self, end): return [self.at, self.at + self.rise]
    def lin(self, t):
        f, g = float(self.frm), float(self.to)
        if t < self.at:
            return f
        if t < self.at + self.rise:
            return f + (g - f) * float((t - self.at) / self.rise)
        return g
    def dlin(self, t):
        if self.at < t < self.at + self.rise:
            return (float(self.to) - float(self.frm)) / self.rise
        return 0.0


@dataclass
class Pulse(Waveform):
    low: Decimal
    high: Decimal
    period: int
    width: int
    rise: int = 0
    fall: int = 0
    start: int = 0
    count: Optional[int] = None
    def text(self, T):
        s = (f"pulse(low={si(self.low)}, high={si(self.high)}, period={T(self.period)}, "
             f"width={T(self.width)}, rise={T(self.rise)}, fall={T(self.fall)}, "
             f"start={T(self.start)}")
        if self.count is not None:
            s += f", count={self.count}"
        return s + ")"
    def corners(self, end):
        out, k = [], 0
        while self.start + k * self.period <= end and (self.count is None or k < self.count):
            b = self.start + k * self.period
            out += [b, b + self.rise, b + self.rise + self.width,
                    b + self.rise + self.width + self.fall]
            k += 1
        return out
    def _phase(self, t):
        if t < self.start:
            return None
        k = math.floor((t - self.start) / self.period)
        if self.count is not None and k >= self.count:
            return None
        return t - self.start - k * self.period
    def lin(self, t):
        lo, hi = float(self.low), float(self.high)
        tau = self._phase(t)
        if tau is None:
            return lo
        if tau < self.rise:
            return lo + (hi - lo) * float(tau / self.rise)
        if tau < self.rise + self.width:
            return hi
        if tau < self.rise + self.width + self.fall:
            return hi - (hi - lo) * float((tau - self.rise - self.width) / self.fall)
        return lo
    def dlin(self, t):
        lo, hi = float(self.low), float(self.high)
        tau = self._phase(t)
        if tau is None:
            return 0.0
        if tau < self.rise:
            return (hi - lo) / self.rise
        if self.rise + self.width < tau < self.rise + self.width + self.fall:
            return -(hi - lo) / self.fall
        return 0.0


@dataclass
class Points(Waveform):
    pts: list  # [(tick, Decimal)], ticks strictly increasing
    def text(self, T):
        return "points(" + ", ".join(f"{T(t)} {si(v)}" for t, v in self.pts) + ")"
    def corners(self, end): return [t for t, _ in self.pts]
    def _seg(self, t):
        for (t0, v0), (t1, v1) in zip(self.pts, self.pts[1:]):
            if t0 <= t < t1:
                return t0, float(v0), t1, float(v1)
        return None
    def lin(self, t):
        if t < self.pts[0][0]:
            return float(self.pts[0][1])
        s = self._seg(t)
        if s is None:
            return float(self.pts[-1][1])
        t0, v0, t1, v1 = s
        return v0 + (v1 - v0) * float((t - t0) / (t1 - t0))
    def dlin(self, t):
        s = self._seg(t)
        if s is None:
            return 0.0
        t0, v0, t1, v1 = s
        return (v1 - v0) / (t1 - t0)


@dataclass
class Sine(Waveform):
    freq: Decimal
    amp: Decimal = Decimal(1)
    mean: Decimal = Decimal(0)
    phase: Decimal = Decimal(0)
    start: int = 0
    tau: Optional[Decimal] = None
    def text(self, T):
        s = f"sine(freq={si(self.freq)}, amp={si(self.amp)}, mean={si(self.mean)}, " \
            f"phase={self.phase}, start={T(self.start)}"
        if self.tau is not None:
            s += f", tau={si(self.tau)}"
        return s + ")"
    def corners(self, end): return [self.start]
    def lin(self, t):
        v = float(self.mean)
        if t < self.start:  # before start: its value at start
            v += float(self.amp) * math.sin(float(self.phase))
        return v
    def osc(self):
        sigma = 0.0 if self.tau is None else 1.0 / float(self.tau)
        return [Osc(float(self.amp), 2.0 * math.pi * float(self.freq), float(self.phase),
                    sigma, self.start)]


@dataclass
class Sum(Waveform):
    parts: list
    def text(self, T): return "(" + " + ".join(p.text(T) for p in self.parts) + ")"
    def corners(self, end): return [c for p in self.parts for c in p.corners(end)]
    def lin(self, t): return sum(p.lin(t) for p in self.parts)
    def dlin(self, t): return sum(p.dlin(t) for p in self.parts)
    def osc(self): return [o for p in self.parts for o in p.osc()]


# --- Circuit ------------------------------------------------------------------

@dataclass
class Part:
    kind: str          # 'R', 'C', 'L', 'V'
    name: str
    a: str
    b: str
    value: Decimal = Decimal(0)
    esr: Optional[Decimal] = None
    esl: Optional[Decimal] = None
    dcr: Optional[Decimal] = None
    rpar: Optional[Decimal] = None
    wave: Optional[Waveform] = None
    unit: str = ""


@dataclass
class Circuit:
    title: str
    quantum: Decimal        # seconds per tick; the sample step is 2 ticks
    samples: int            # N: output at k*h, k = 0..N
    parts: list = field(default_factory=list)
    records: list = field(default_factory=list)   # 'n3', 'L2.i', 'L2.il', 'C4.vc'
    initial_dc: bool = True
    comment: str = ""

    @property
    def q(self) -> float: return float(self.quantum)
    @property
    def end(self) -> int: return 2 * self.samples
    def T(self, ticks: int) -> str: return si(self.quantum * ticks)

    def sources(self): return [p for p in self.parts if p.kind == "V"]

    def netlist(self) -> str:
        kind = {"R": "resistor", "C": "capacitor", "L": "inductor", "V": "voltage"}
        out = []
        if self.comment:
            out += ["# " + line for line in self.comment.splitlines()]
        out.append(f'title "{self.title}"')
        out.append("")
        for p in self.parts:
            val = p.wave.text(self.T) if p.kind == "V" else si(p.value) + p.unit
            line = f"{kind[p.kind]:<9} {p.name:<5} {p.a:<6} {p.b:<6} {val}"
            for key in ("esr", "esl", "dcr", "rpar"):
                v = getattr(p, key)
                if v is not None:
                    line += f" {key}={si(v)}"
            out.append(line)
        out.append("")
        init = "" if self.initial_dc else " initial=zero"
        out.append(f"transient until={self.T(self.end)} every={self.T(2)}{init}")
        out.append("record    " + ", ".join(self.records))
        return "\n".join(out) + "\n"


# --- MNA ----------------------------------------------------------------------

@dataclass
class Mna:
    """Descriptor C x' + G x = B u over x = [node voltages; inductance currents;
    source currents]; element values are the doubles of the netlist's decimals."""
    nodes: list        # non-gnd node names, hidden ones included ("C1#1")
    C: np.ndarray
    G: np.ndarray
    B: np.ndarray
    caps: list         # (node index a, node index b) per capacitance, -1 = gnd
    cap_values: np.ndarray
    ind_values: np.ndarray
    cap_names: list
    ind_names: list    # per inductance: part name ("L2" or "C3#esl")
    n_nodes: int
    n_ind: int
    n_src: int
    rows: dict         # signal name -> output row over x (numpy float)


def build_mna(c: Circuit, signals: list) -> Mna:
    nodes: list = []
    def node(name):
        if name == "gnd":
            return -1
        if name not in nodes:
            nodes.append(name)
        return nodes.index(name)
    for p in c.parts:  # user nodes first, in order of mention
        node(p.a); node(p.b)
    R, Cs, Ls, Vs = [], [], [], []   # primitive elements
    cap_of, ind_of, rpar_of = {}, {}, {}
    for p in c.parts:
        a, b = node(p.a), node(p.b)
        if p.kind == "R":
            R.append((a, b, float(p.value)))
        elif p.kind == "C":
            x = a
            if p.esr is not None:
                h = node(p.name + "#esr"); R.append((x, h, float(p.esr))); x = h
            if p.esl is not None:
                h = node(p.name + "#esl"); Ls.append((x, h, float(p.esl), p.name + "#esl")); x = h
            cap_of[p.name] = len(Cs)
            Cs.append((x, b, float(p.value), p.name))
        elif p.kind == "L":
            x = a
            if p.rpar is not None:
                R.append((a, b, float(p.rpar))); rpar_of[p.name] = (a, b, float(p.rpar))
            if p.dcr is not None:
                h = node(p.name + "#dcr"); R.append((x, h, float(p.dcr))); x = h
            ind_of[p.name] = len(Ls)
            Ls.append((x, b, float(p.value), p.name))
        elif p.kind == "V":
            Vs.append((a, b))
    nn, nl, nv = len(nodes), len(Ls), len(Vs)
    n = nn + nl + nv
    C = np.zeros((n, n)); G = np.zeros((n, n)); B = np.zeros((n, nv))
    def stamp2(M, a, b, g):
        for i, si_ in ((a, 1), (b, -1)):
            for j, sj in ((a, 1), (b, -1)):
                if i >= 0 and j >= 0:
                    M[i, j] += si_ * sj * g
    for a, b, r in R:
        stamp2(G, a, b, 1.0 / r)
    for a, b, cap, _ in Cs:
        stamp2(C, a, b, cap)
    for k, (a, b, ind, _) in enumerate(Ls):
        row = nn + k
        C[row, row] = ind          # L di/dt - (v_a - v_b) = 0
        if a >= 0: G[row, a] -= 1; G[a, row] += 1   # current leaves a ...
        if b >= 0: G[row, b] += 1; G[b, row] -= 1   # ... and enters b
    for k, (a, b) in enumerate(Vs):
        row = nn + nl + k
        if a >= 0: G[row, a] += 1; G[a, row] += 1   # v_a - v_b = u_k
        if b >= 0: G[row, b] -= 1; G[b, row] -= 1
        B[row, k] = 1.0
    rows = {}
    for s in signals:
        r = np.zeros(n)
        if s.endswith(".vc"):
            a, b, _, _ = Cs[cap_of[s[:-3]]]
            if a >= 0: r[a] += 1
            if b >= 0: r[b] -= 1
        elif s.endswith(".il"):
            r[nn + ind_of[s[:-3]]] = 1
        elif s.endswith(".i"):      # inductor terminal current: inductance + rpar
            name = s[:-2]
            r[nn + ind_of[name]] = 1
            if name in rpar_of:
                a, b, rp = rpar_of[name]
                if a >= 0: r[a] += 1 / rp
                if b >= 0: r[b] -= 1 / rp
        else:
            r[nodes.index(s)] = 1
        rows[s] = r
    return Mna(nodes, C, G, B, [(a, b) for a, b, _, _ in Cs],
               np.array([x[2] for x in Cs], dtype=float), np.array([x[2] for x in Ls], dtype=float),
               [x[3] for x in Cs],
               [x[3] for x in Ls], nn, nl, nv, rows)


# --- Reduction to state space ---------------------------------------------------

class _Float:
    """numpy double backend."""
    @staticmethod
    def arr(M): return np.array(M, dtype=float)
    @staticmethod
    def solve(A, B): return np.linalg.solve(A, B)
    @staticmethod
    def to_float(M): return np.array(M, dtype=float)


class _Mp:
    """mpmath backend: object arrays of mpf, solves by mpmath LU (cached per matrix)."""
    @staticmethod
    def arr(M):
        M = np.asarray(M)
        out = np.empty(M.shape, dtype=object)
        for idx in np.ndindex(M.shape):
            out[idx] = mpmath.mpf(M[idx]) if not isinstance(M[idx], mpmath.mpf) else M[idx]
        return out
    @staticmethod
    def solve(A, B):
        mA = mpmath.matrix(A.tolist())
        B2 = B.reshape(B.shape[0], -1)
        out = np.empty(B2.shape, dtype=object)
        for j in range(B2.shape[1]):
            x = mpmath.lu_solve(mA, mpmath.matrix(B2[:, j].tolist()))
            for i in range(B2.shape[0]):
                out[i, j] = x[i]
        return out.reshape(B.shape)
    @staticmethod
    def to_float(M):
        return np.array([[float(v) for v in row] for row in np.atleast_2d(M)]).reshape(np.shape(M))


@dataclass
class StateSpace:
    A: np.ndarray; B: np.ndarray; C: np.ndarray; D: np.ndarray   # doubles
    x0: np.ndarray                 # initial reduced state (double)
    signals: list
    mp: Optional[dict] = None      # the same in mpmath (object arrays), when requested
    n_caps: int = 0
    n_ind: int = 0


def _cap_transform(m: Mna) -> np.ndarray:
    """P with P v = [capacitor voltages; one root node voltage per capacitor-forest
    component without gnd]. Integer, unimodular (forest incidence), so P^-1 is exact."""
    parent = list(range(m.n_nodes + 1))      # vertex m.n_nodes is gnd
    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]; i = parent[i]
        return i
    g = m.n_nodes
    rows = []
    for a, b in m.caps:
        ia, ib = (g if a < 0 else a), (g if b < 0 else b)
        ra, rb = find(ia), find(ib)
        if ra == rb:
            raise ValueError("capacitor loop: not handled by this model")
        parent[ra] = rb
        r = np.zeros(m.n_nodes)
        if a >= 0: r[a] += 1
        if b >= 0: r[b] -= 1
        rows.append(r)
    seen = set()
    for i in range(m.n_nodes):
        root = find(i)
        if root == find(g) or root in seen:
            continue
        seen.add(root)
        r = np.zeros(m.n_nodes); r[i] = 1; rows.append(r)
    P = np.array(rows)
    assert P.shape == (m.n_nodes, m.n_nodes)
    return P


def reduce(m: Mna, c: Circuit, signals: list, precise: bool) -> StateSpace:
    """Index-1 reduction in capacitor-voltage coordinates; DC point from G x = B u(0-)."""
    be = _Mp if precise else _Float
    P = _cap_transform(m)
    Pinv = np.linalg.inv(P)
    assert np.allclose(Pinv, np.round(Pinv), atol=1e-12)
    Pinv = np.round(Pinv)
    n = m.C.shape[0]
    T = np.eye(n); T[:m.n_nodes, :m.n_nodes] = Pinv
    nc, nr = len(m.caps), m.n_nodes - len(m.caps)
    d = list(range(nc)) + list(range(m.n_nodes, m.n_nodes + m.n_ind))
    a = list(range(nc, m.n_nodes)) + list(range(m.n_nodes + m.n_ind, n))
    if precise:
        mpmath.mp.dps = MP_DIGITS
    Tm = be.arr(T)
    Cp = Tm.T @ be.arr(m.C) @ Tm
    Gp = Tm.T @ be.arr(m.G) @ Tm
    Bp = Tm.T @ be.arr(m.B)
    # In these coordinates C' = diag(capacitances, 0, inductances, 0) exactly; take the
    # diagonal from the element values (the product above differs from it by rounding only).
    cvals = np.concatenate([m.cap_values, m.ind_values])
    scale = max(abs(float(v)) for v in cvals)
    resid = max(abs(float(v)) for v in (Cp - be.arr(np.diag(np.concatenate(
        [m.cap_values, np.zeros(nr), m.ind_values, np.zeros(m.n_src)])))).ravel())
    assert resid <= 1e-12 * scale, f"C' is not diagonal on the states ({resid:.1e})"
    cinv = np.array([1 / v for v in be.arr(cvals)], dtype=object if precise else float)
    Gaa = Gp[np.ix_(a, a)]
    rhs = np.concatenate([Gp[np.ix_(a, d)], Bp[a, :]], axis=1)
    sol = be.solve(Gaa, rhs)                      # Gaa^-1 [G_ad, B_a]
    K, Ka = sol[:, :len(d)], sol[:, len(d):]
    A = -(cinv[:, None] * (Gp[np.ix_(d, d)] - Gp[np.ix_(d, a)] @ K))
    Bs = cinv[:, None] * (Bp[d, :] - Gp[np.ix_(d, a)] @ Ka)
    Y = np.array([m.rows[s] for s in signals]).reshape(len(signals), n)
    YT = be.arr(Y) @ Tm
    Cs = YT[:, d] - YT[:, a] @ K
    Ds = YT[:, a] @ Ka
    # DC operating point with the sources just before t = 0 (NETLIST.md section 7).
    if c.initial_dc:
        u0 = be.arr(np.array([s.wave.value(Fraction(-1), c.q) for s in c.sources()]))
        xfull = be.solve(be.arr(m.G), be.arr(m.B) @ u0)
        Tinv = np.eye(n); Tinv[:m.n_nodes, :m.n_nodes] = P
        z = be.arr(Tinv) @ xfull
        x0 = z[d]
    else:
        x0 = be.arr(np.zeros(len(d)))
    f = be.to_float
    ss = StateSpace(f(A), f(Bs).reshape(len(d), -1), f(Cs).reshape(len(signals), len(d)),
                    f(Ds).reshape(len(signals), -1), f(x0).ravel(), list(signals),
                    n_caps=nc, n_ind=m.n_ind)
    if precise:
        ss.mp = {"A": A, "B": Bs, "x0": x0}
    return ss


# --- Exact response -------------------------------------------------------------

def augmented(A, B, oscs, src_of_osc, zero, one, ramp=None):
    """M = [[A, B, 0, B_osc], [0, 0, I/L, 0], [0, 0, 0, 0], [0, 0, 0, S]] acting on
    [x; v; d; z]: v the piecewise-linear input, d its change over the interval of length L
    (`ramp` = 1/L; scaled so that M L has no entry of size L, as scipy's lsim does), z the
    damped-sine generators."""
    n, mi = A.shape[0], B.shape[1]
    N = n + 2 * mi + 2 * len(oscs)
    M = np.empty((N, N), dtype=object); M[:] = zero
    M[:n, :n] = A
    M[:n, n:n + mi] = B
    for j in range(mi):
        M[n + j, n + mi + j] = one if ramp is None else ramp
    for k, o in enumerate(oscs):
        col = n + 2 * mi + 2 * k
        for i in range(n):
            M[i, col] = B[i, src_of_osc[k]] * o.amp
        M[col, col] = -o.sigma * one; M[col, col + 1] = o.omega * one
        M[col + 1, col] = -o.omega * one; M[col + 1, col + 1] = -o.sigma * one
    return M


def simulate(c: Circuit, ss: StateSpace, use_mp: bool):
    """Exact samples y(k h), k = 0..N: between consecutive breakpoints (samples and
    waveform corners) x(t_b) = top rows of expm(M (t_b - t_a)) [x; v; d; z](t_a).
    Returns (times, Y[samples, signals], lengths used)."""
    srcs = c.sources()
    oscs, src_of = [], []
    for j, s in enumerate(srcs):
        for o in s.wave.osc():
            oscs.append(o); src_of.append(j)
    n, mi = ss.A.shape[0], len(srcs)
    end = c.end
    bps = set(range(0, end + 1, 2))
    for s in srcs:
        bps |= {t for t in s.wave.corners(end) if 0 < t < end}
    bps = sorted(bps)
    lengths = sorted({b - a for a, b in zip(bps, bps[1:])})
    q = c.q
    E = {}
    for L in lengths:
        if use_mp:
            mpmath.mp.dps = MP_DIGITS
            hm = mpmath.mpf(L) * mpmath.mpf(str(c.quantum))
            M = augmented(ss.mp["A"], ss.mp["B"], oscs, src_of, mpmath.mpf(0), mpmath.mpf(1),
                          1 / hm)
            Mm = mpmath.matrix([[v * hm for v in row] for row in M.tolist()])
            Em = mpmath.expm(Mm)
            E[L] = np.array([[float(Em[i, j]) for j in range(Mm.cols)] for i in range(n)])
        else:
            M = augmented(ss.A, ss.B, oscs, src_of, 0.0, 1.0, 1.0 / (L * q)).astype(float)
            E[L] = scipy.linalg.expm(M * (L * q))[:n, :]
    x = ss.x0.copy()
    times, Y = [], []
    def state_in(t):
        v = [s.wave.lin(Fraction(t)) for s in srcs]
        z = []
        for o in oscs:
            if t >= o.start:
                tau = (t - o.start) * q
                e = math.exp(-o.sigma * tau)
                z += [e * math.sin(o.omega * tau + o.phase), e * math.cos(o.omega * tau + o.phase)]
            else:
                z += [0.0, 0.0]
        return v, z
    def out(t):
        u = np.array([s.wave.value(Fraction(t), q) for s in srcs])
        times.append(t * q)
        Y.append(ss.C @ x + ss.D @ u)
    out(0)
    for ta, tb in zip(bps, bps[1:]):
        v, z = state_in(ta)
        mid = Fraction(ta + tb, 2)
        dsl = [s.wave.dlin(mid) * (tb - ta) for s in srcs]   # change over the interval
        X = np.concatenate([x, v, dsl, z])
        x = E[tb - ta] @ X
        if tb % 2 == 0:
            out(tb)
    return np.array(times), np.array(Y), lengths


def input_samples(c: Circuit) -> np.ndarray:
    """u(k h) for every source, the sample values lsim interpolates linearly."""
    return np.array([[s.wave.value(Fraction(2 * k), c.q) for s in c.sources()]
                     for k in range(c.samples + 1)])


def eig_span(ss: StateSpace):
    """(fastest |lambda|, slowest |lambda|, slowest decay rate) of A. The slow end comes
    from the eigenvalues of A^-1 (accurate where those of A are not)."""
    lam_fast = np.linalg.eigvals(ss.A)
    if ss.mp is not None:
        Ainv = _Mp.to_float(_Mp.solve(ss.mp["A"], _Mp.arr(np.eye(ss.A.shape[0]))))
    else:
        Ainv = np.linalg.inv(ss.A)
    mu = np.linalg.eigvals(Ainv)
    lam_slow = 1 / mu
    rates = -lam_slow.real
    return float(np.max(np.abs(lam_fast))), float(np.min(np.abs(lam_slow))), float(np.min(rates))
