#!/usr/bin/python3
"""Independent reference for the hard-record tests of taut's identification.

A prismatic beam under axial tension N with rotational end springs, solved by
finite differences (not taut's Hermite finite elements), and multi-channel
ambient accelerations synthesised from its modes with coloured loads and
coloured measurement noise.

Beam: EI w'''' - N w'' + m w_tt = p(x, t) on 0 < x < L, w = 0 at both ends,
EI w'' = +-k w' at the ends (rotational springs of stiffness k [N m/rad];
k = 0 pinned, k = inf clamped). Central differences on n interior nodes,
h = L / (n + 1); the moment condition enters through a ghost node,
w_{-1} = c w_1 with c = (k/(2h) - EI/h^2) / (k/(2h) + EI/h^2), which keeps the
pentadiagonal matrix symmetric. Eigenvalues m omega^2 by scipy.sparse.linalg.eigsh
(ARPACK, shift-invert about 0). Discretisation error O(h^2): (n pi h / L)^2 / 24 relative in
frequency, below 3e-5 for mode 14 at the default 1999 nodes.

Ambient response: K point loads at random positions, each a Gaussian random
process with a coloured spectrum |P(f)| ~ (1 + (f / f_c)^2)^(-1/4) (a softly
falling wind-like load), modal superposition with the mass-normalised modes
and modal damping zeta, a_s(f) = sum_r phi_r(x_s) g_r H_r(f) F_r(f),
H_r = -omega^2 / (omega_r^2 - omega^2 + 2 i zeta omega_r omega), synthesised in
the frequency domain (inverse real FFT; the record is one period of a
stationary process). g_r scales single modes (a weak fundamental).
Measurement noise per channel: white at noise_share of the channel RMS plus a
random walk (1/f^2 drift) at drift_share.

Sag (optional, vertical plane, axially fixed supports): "sag_ea_n" (EA [N])
and "gravity_m_s2" add the stiffness of the extra cable tension that a
deflection w of a shallow parabolic profile (curvature m g / N) produces,
h = (EA / L) (m g / N) int w dx (Irvine, Cable Structures, 1981, ch. 3;
his lambda^2 = (m g L / N)^2 L EA / (N L) for L_e = L): a rank-one term
(m g / N)^2 (EA / L) h_step 1 1^T in the finite-difference matrix, kept
symmetric; shift-invert by Sherman-Morrison on the sparse LU.

Free decay after a blow (optional, "impact": {"x_m", "impulse_n_s",
"modes"}): the large-amplitude response of the beam between immovable ends,
N(t) = N + (EA / 2L) int w'^2 dx (Kirchhoff's stretching; Woinowsky-Krieger,
J. Appl. Mech. 17, 1950), by a Galerkin reduction on the lowest linear
modes above, phi mass-normalised: q'' + 2 zeta omega q' + omega^2 q +
(EA / 2L) (q^T B q) B q = 0, B = Phi^T h D Phi (D the second-difference
matrix of -w''), started from the blow's modal velocities q'(0) = phi(x) J,
integrated by scipy's DOP853 (rtol 1e-10) and sampled at fs; "ea_n" gives
EA. The record then carries '# excitation=impact'.

Faults (optional): a dead channel (signal x 1e-7), a clipped channel (clipped
at clip_share of its peak), a dropout (a run of exact zeros).
Cross-axis mixing (optional): every channel also carries the other plane's
response (end springs k_other, same N and m, EI_other) times sin(angle).

Usage: beam_reference.py PARAMS_JSON OUT_CSV  -> writes the record CSV (taut's
record format: '# key=value' lines, a time_s column, one column per channel)
and prints a JSON object with the true frequencies of the in-plane modes.
Usage: beam_reference.py --modes PARAMS_JSON -> prints the frequencies (and,
with "sensor_x_m", "shapes": per mode the shape at the sensors).
Usage: beam_reference.py --batch CASES_JSON_FILE -> a list of PARAMS objects,
each with "out" (its CSV path); prints the list of results.
"""
import json
import sys

import numpy as np
from scipy import sparse
from scipy.sparse import linalg as sparse_linalg


def beam_modes(L, m, EI, N, k_left, k_right, n_modes, nodes=1999, sag_ea=None, gravity=9.80665):
    """Lowest n_modes natural frequencies [Hz] and mass-normalised shapes (nodes x modes)."""
    h = L / (nodes + 1)

    def ghost(k):
        if k is None or np.isinf(k):
            return 1.0
        a, b = k / (2.0 * h), EI / h**2
        return (a - b) / (a + b)

    d0 = np.full(nodes, 6.0 * EI / h**4 + 2.0 * N / h**2)
    d1 = np.full(nodes - 1, -4.0 * EI / h**4 - N / h**2)
    d2 = np.full(nodes - 2, 1.0 * EI / h**4)
    d0[0] += ghost(k_left) * EI / h**4
    d0[-1] += ghost(k_right) * EI / h**4
    A = sparse.diags([d2, d1, d0, d1, d2], [-2, -1, 0, 1, 2], format="csc")
    if sag_ea:
        # Rank-one sag stiffness c u u^T (module docstring), u = 1 on the nodes.
        c = (m * gravity / N) ** 2 * (sag_ea / L) * h
        u = np.ones(nodes)
        lu = sparse_linalg.splu(A)
        a_inv_u = lu.solve(u)
        denom = 1.0 + c * (u @ a_inv_u)

        def op_inv(v):
            y = lu.solve(np.asarray(v).ravel())
            return y - c * a_inv_u * (u @ y) / denom

        A_op = sparse_linalg.LinearOperator((nodes, nodes), matvec=lambda v: A @ v + c * u * (u @ v),
                                            dtype=float)
        OPinv = sparse_linalg.LinearOperator((nodes, nodes), matvec=op_inv, dtype=float)
        lam, vec = sparse_linalg.eigsh(A_op, k=n_modes, sigma=0.0, which="LM", OPinv=OPinv, tol=1e-13)
    else:
        # Lowest eigenpairs by ARPACK in shift-invert mode about 0 (sparse LU).
        lam, vec = sparse_linalg.eigsh(A, k=n_modes, sigma=0.0, which="LM", tol=1e-13)
    order = np.argsort(lam)
    lam, vec = lam[order], vec[:, order]
    omega2 = lam / m
    if np.any(omega2 <= 0):
        raise ValueError("the beam is buckled (a non-positive eigenvalue)")
    # Mass normalisation: sum m h phi^2 = 1.
    vec = vec / np.sqrt(m * h)
    x = np.linspace(h, L - h, nodes)
    return np.sqrt(omega2) / (2 * np.pi), vec, x


def shapes_at(vec, x, positions, L):
    xs = np.concatenate(([0.0], x, [L]))
    out = []
    for r in range(vec.shape[1]):
        v = np.concatenate(([0.0], vec[:, r], [0.0]))
        out.append(np.interp(positions, xs, v))
    return np.array(out).T  # sensors x modes


def synthesise(p, f_hz, vec, x, positions, rng, gains):
    fs, n = p["fs"], int(round(p["duration_s"] * p["fs"]))
    L = p["length_m"]
    freq = np.fft.rfftfreq(n, 1.0 / fs)
    w = 2 * np.pi * freq
    n_loads = p.get("loads", 6)
    xl = rng.uniform(0.05 * L, 0.95 * L, n_loads)
    colour = (1.0 + (freq / p.get("load_corner_hz", 5.0)) ** 2) ** -0.25
    P = (rng.standard_normal((n_loads, freq.size)) + 1j * rng.standard_normal((n_loads, freq.size))) * colour
    phi_load = shapes_at(vec, x, xl, L)  # loads x modes
    phi_s = shapes_at(vec, x, positions, L)  # sensors x modes
    zeta = p.get("damping_ratio", 0.01)
    A = np.zeros((len(positions), freq.size), dtype=complex)
    for r in range(len(f_hz)):
        wr = 2 * np.pi * f_hz[r]
        H = -(w**2) / (wr**2 - w**2 + 2j * zeta * wr * w)
        F = phi_load[:, r] @ P
        A += np.outer(phi_s[:, r] * gains[r], H * F)
    A[:, 0] = 0.0
    return np.fft.irfft(A, n=n, axis=1).T  # samples x sensors


def free_decay(p, f_hz, vec, x, positions):
    """Sensor accelerations [samples x sensors] of the nonlinear free decay (module docstring)."""
    from scipy.integrate import solve_ivp
    L, m = p["length_m"], p["mass_per_length_kg_m"]
    imp = p["impact"]
    k = min(imp.get("modes", 4), len(f_hz))
    phi = vec[:, :k]
    h = L / (len(x) + 1)
    # -w'' by second differences with w = 0 at the ends: D = tridiag(-1, 2, -1) / h^2.
    D = sparse.diags([-np.ones(len(x) - 1), 2 * np.ones(len(x)), -np.ones(len(x) - 1)], [-1, 0, 1]) / h**2
    B = phi.T @ (h * (D @ phi))
    omega = 2 * np.pi * np.asarray(f_hz[:k])
    zeta = p.get("damping_ratio", 0.005)
    c = p["ea_n"] / (2 * L)

    def rhs(_, y):
        q, v = y[:k], y[k:]
        bq = B @ q
        return np.concatenate((v, -2 * zeta * omega * v - omega**2 * q - c * (q @ bq) * bq))

    v0 = shapes_at(phi, x, np.array([imp["x_m"]]), L)[0] * imp["impulse_n_s"]
    fs, n = p["fs"], int(round(p["duration_s"] * p["fs"]))
    t = np.arange(n) / fs
    sol = solve_ivp(rhs, (0.0, t[-1]), np.concatenate((np.zeros(k), v0)), method="DOP853", t_eval=t,
                    rtol=1e-10, atol=1e-14)
    acc = np.array([rhs(ti, yi)[k:] for ti, yi in zip(sol.t, sol.y.T)])  # q''
    return acc @ shapes_at(phi, x, positions, L).T


def simulate(p, out_csv):
    rng = np.random.default_rng(p.get("seed", 1))
    L, m = p["length_m"], p["mass_per_length_kg_m"]
    fs = p["fs"]
    top = p.get("band_top_share", 0.35) * fs
    n_modes = p.get("modes", 12)
    f, vec, x = beam_modes(L, m, p["ei_nm2"], p["axial_force_n"], p.get("k_left"), p.get("k_right"), n_modes)
    keep = f < top
    f, vec = f[keep], vec[:, keep]
    gains = np.ones(len(f))
    for r, g_db in p.get("mode_gain_db", {}).items():
        if int(r) - 1 < len(f):
            gains[int(r) - 1] = 10 ** (g_db / 20.0)
    positions = np.array(p["sensor_x_m"])
    if "impact" in p:
        y = free_decay(p, f, vec, x, positions)
    else:
        y = synthesise(p, f, vec, x, positions, rng, gains)
    if "cross_axis_deg" in p:
        fo, veco, xo = beam_modes(L, m, p["ei_other_nm2"], p["axial_force_n"], p.get("k_other"),
                                  p.get("k_other"), n_modes)
        ko = fo < top
        yo = synthesise(p, fo[ko], veco[:, ko], xo, positions, rng, np.ones(int(ko.sum())))
        a = np.radians(p["cross_axis_deg"])
        y = np.cos(a) * y + np.sin(a) * yo
    n = y.shape[0]
    for c in range(y.shape[1]):
        rms = np.sqrt(np.mean(y[:, c] ** 2))
        y[:, c] += p.get("noise_share", 0.05) * rms * rng.standard_normal(n)
        walk = np.cumsum(rng.standard_normal(n))
        walk -= np.linspace(walk[0], walk[-1], n)
        y[:, c] += p.get("drift_share", 0.02) * rms * walk / max(np.std(walk), 1e-30)
    fault = p.get("fault")
    if fault:
        c = fault["channel"]
        if fault["kind"] == "dead":
            y[:, c] = y[:, c] * 1e-7
        elif fault["kind"] == "clipped":
            lim = fault.get("clip_share", 0.3) * np.max(np.abs(y[:, c]))
            y[:, c] = np.clip(y[:, c], -lim, lim)
        elif fault["kind"] == "dropout":
            a0 = int(fault.get("start_share", 0.4) * n)
            y[a0:a0 + int(fault.get("length_share", 0.2) * n), c] = 0.0
    names = p["channels"]
    with open(out_csv, "w") as fh:
        fh.write("# recorded_at=2026-11-20T10:00:00Z\n# units=m/s2\n")
        if "impact" in p:
            fh.write("# excitation=impact\n")
        fh.write("time_s," + ",".join(names) + "\n")
        t = np.arange(n) / fs
        np.savetxt(fh, np.column_stack([t, y]), delimiter=",", fmt="%.9g")
    return {"frequencies_hz": list(f), "samples": n}


def main():
    if sys.argv[1] == "--batch":
        # A JSON file holding a list of parameter objects, each with "out" (the CSV path).
        with open(sys.argv[2]) as fh:
            cases = json.load(fh)
        print(json.dumps([simulate(p, p["out"]) for p in cases]))
        return
    if sys.argv[1] == "--modes":
        p = json.loads(sys.argv[2])
        f, vec, x = beam_modes(p["length_m"], p["mass_per_length_kg_m"], p["ei_nm2"], p["axial_force_n"],
                               p.get("k_left"), p.get("k_right"), p["modes"], p.get("nodes", 1999),
                               p.get("sag_ea_n"), p.get("gravity_m_s2", 9.80665))
        out = {"frequencies_hz": list(f)}
        if "sensor_x_m" in p:  # shapes at the sensors, one list per mode
            out["shapes"] = shapes_at(vec, x, np.array(p["sensor_x_m"]), p["length_m"]).T.tolist()
        print(json.dumps(out))
        return
    print(json.dumps(simulate(json.loads(sys.argv[1]), sys.argv[2])))


if __name__ == "__main__":
    main()
