# Checks the reference used for the 1000-state ladder in lsim_bench.py: scipy expm stepping
# at h (what lsim does) vs h/4 vs an eigendecomposition solution (numpy 1.24, scipy 1.10).
# Finding (2026-12-02): a single expm step at ||A h||_1 = 50 is off by 3.5e-8 of peak, while
# h/4 and the eigendecomposition agree; ringdown agrees with the eigendecomposition to 3e-12.
# Usage: /usr/bin/python3 bench/ladder_reference_check.py  (RINGDOWN_BIN: the binary)
import sys, numpy as np, scipy.linalg as sl
import os, subprocess, tempfile
HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE); sys.path.insert(0, os.path.join(HERE, '..', 'tests', 'reference'))
import lsim_bench as lb
c = lb.cases()["ladder1000"]
ss = lb.model(c)
A, B, C, D = ss.A, ss.B, ss.C, ss.D
n = A.shape[0]; m = B.shape[1]
T = lb.times(c); U = lb.inputs(c)
h = T[1]-T[0]
print("n", n, "h", h, "normAh", np.linalg.norm(A*h, 1))
def step_run(sub):
    hh = h/sub
    M = np.zeros((n+m, n+m)); M[:n,:n] = A*hh; M[:n,n:] = B*hh
    E = sl.expm(M); Phi = E[:n,:n]; Gam = E[:n,n:]
    x = ss.x0.copy(); ys=[C@x + D@U[0]]
    for k in range(1, len(T)):
        for s in range(sub): x = Phi@x + Gam@U[k]
        ys.append(C@x + D@U[k])
    return np.array(ys)
y1 = step_run(1); y4 = step_run(4)
peak = np.abs(y1).max(axis=0)
print("h vs h/4:", (np.abs(y1-y4).max(axis=0)/peak))
# eigen-decomposition based exact constant-input response (U constant after t=0)
w, V = np.linalg.eig(A); Vi = np.linalg.inv(V)
u = U[1]
xs = -np.linalg.solve(A, B@u)
z0 = Vi@(ss.x0 - xs)
ye = np.array([ (C@(V@(np.exp(w*t)*z0)).real + C@xs + D@u) for t in T[1:]])
print("h vs eig:", (np.abs(y1[1:]-ye).max(axis=0)/peak))
# ringdown on the same netlist (RINGDOWN_BIN, default build/ringdown)
binary = os.environ.get("RINGDOWN_BIN", os.path.join(HERE, "..", "build", "ringdown"))
if os.path.exists(binary):
    with tempfile.TemporaryDirectory() as d:
        net, out = os.path.join(d, "ladder1000.rlc"), os.path.join(d, "ladder1000.csv")
        open(net, "w").write(c.netlist())
        subprocess.run([binary, "run", net, "--csv", out, "--digits", "17", "--quiet"], check=True)
        r = np.loadtxt(out, delimiter=",", skiprows=1)
    print("ringdown vs eig:", np.abs(r[1:, 1:] - ye).max(axis=0) / peak)
