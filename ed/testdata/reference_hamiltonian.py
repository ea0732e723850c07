#!/usr/bin/env python3
"""Reference Hamiltonian for Frustum's tests, independent of the engine.

Reads from stdin a JSON list of cases

    {"cluster": {<cluster file, FORMAT.md>}, "field": [Bx, By, Bz],
     "temperatures": [T, ...]}            # temperatures optional

builds the full dense Hamiltonian of FORMAT.md with numpy (Kronecker products
of the single-site spin matrices), diagonalizes it, and prints a JSON list,
one entry per case:

    {"energies": [all eigenvalues, ascending],
     "thermo": {"energy": [...], "specificHeat": [...], "entropy": [...],
                "magnetization": [...], "susceptibility": [...]}}

thermo is present when temperatures were given. Units are Frustum's: K, T,
mu_B; the susceptibility is the isothermal dM/dB along the field direction
(z at zero field), Kubo form, including the Van Vleck part.
"""

import json
import math
import sys

import numpy as np

MU_B_OVER_K_B = 0.67171381563  # K/T, CODATA 2018


def spin_matrices(s):
    """Sx, Sy, Sz for spin s in the basis m = s, s-1, ..., -s."""
    d = int(round(2 * s)) + 1
    m = np.array([s - k for k in range(d)])
    sp = np.zeros((d, d), dtype=complex)  # S+ |m> = sqrt(s(s+1) - m(m+1)) |m+1>
    for k in range(1, d):
        sp[k - 1, k] = math.sqrt(s * (s + 1) - m[k] * (m[k] + 1))
    sm = sp.conj().T
    return [(sp + sm) / 2, (sp - sm) / 2j, np.diag(m).astype(complex)]


def embed(dims, ops):
    """Kronecker product over all sites; ops maps a site index to its matrix."""
    out = np.ones((1, 1), dtype=complex)
    for i, d in enumerate(dims):
        out = np.kron(out, ops.get(i, np.eye(d)))
    return out


def hamiltonian(cluster, field):
    sites = cluster["sites"]
    index = {st["label"]: i for i, st in enumerate(sites)}
    spins = [float(st.get("spin", 0.5)) for st in sites]
    dims = [int(round(2 * s)) + 1 for s in spins]
    S = [spin_matrices(s) for s in spins]
    D = int(np.prod(dims))
    H = np.zeros((D, D), dtype=complex)

    for bond in cluster.get("bonds") or []:
        a, b = index[bond["a"]], index[bond["b"]]
        J = float(bond.get("exchange", 0.0))
        Jz = float(bond.get("exchangeZ", J))
        # C[mu][nu] is the coefficient of Sa^mu Sb^nu, term by term.
        C = np.zeros((3, 3))
        C[0, 0] += J  # J (Sa^x Sb^x + Sa^y Sb^y)
        C[1, 1] += J
        C[2, 2] += Jz  # Jz Sa^z Sb^z
        Dv = bond.get("dm", [0.0, 0.0, 0.0])
        # D . (Sa x Sb) with (Sa x Sb)^x = Sa^y Sb^z - Sa^z Sb^y, and cyclically.
        for c, (p, q) in enumerate([(1, 2), (2, 0), (0, 1)]):
            C[p, q] += Dv[c]
            C[q, p] -= Dv[c]
        T = bond.get("tensor", [0.0] * 9)  # sum Sa^mu T^{mu nu} Sb^nu, row-major
        for mu in range(3):
            for nu in range(3):
                C[mu, nu] += T[3 * mu + nu]
        for mu in range(3):
            Bop = sum(C[mu, nu] * S[b][nu] for nu in range(3))
            if np.any(Bop != 0):
                H += embed(dims, {a: S[a][mu], b: Bop})

    B = np.array(field, dtype=float)
    nB = np.linalg.norm(B)
    n = B / nB if nB > 0 else np.array([0.0, 0.0, 1.0])
    M = np.zeros((D, D), dtype=complex)  # n . sum_i g_i S_i
    for i, st in enumerate(sites):
        A = float(st.get("singleIon", 0.0))
        if A != 0:  # A (S^z)^2
            H += A * embed(dims, {i: S[i][2] @ S[i][2]})
        g = st.get("gTensor")
        if g is None:
            g0 = float(st.get("g", 2.0))
            g = [g0, 0, 0, 0, g0, 0, 0, 0, g0]
        g = np.array(g, dtype=float).reshape(3, 3)  # row-major: g[mu, nu]
        # Zeeman -(mu_B/k_B) B_mu g^{mu nu} S^nu; moment along n: n_mu g^{mu nu} S^nu.
        zee = sum((B @ g)[nu] * S[i][nu] for nu in range(3))
        mom = sum((n @ g)[nu] * S[i][nu] for nu in range(3))
        H -= MU_B_OVER_K_B * embed(dims, {i: zee})
        M += embed(dims, {i: mom})
    return H, M


def thermo(E, V, M, temps):
    Mm = V.conj().T @ M @ V
    M2 = np.abs(Mm) ** 2
    diag = np.real(np.diag(Mm))
    out = {k: [] for k in ("energy", "specificHeat", "entropy", "magnetization", "susceptibility")}
    e0 = E[0]
    for T in temps:
        beta = 1.0 / T
        w = np.exp(-beta * (E - e0))
        Z = w.sum()
        p = w / Z
        Em = float(p @ E)
        dE = E - Em
        C = float(p @ (dE * dE)) * beta * beta
        Sent = math.log(Z) + beta * (Em - e0)
        Mv = float(p @ diag)
        # Kubo: chi/MuB = sum_{m,n} |M_mn|^2 (p_n - p_m)/(E_m - E_n) - beta <M>^2,
        # and (p_n - p_m)/(E_m - E_n) = beta max(p_m, p_n) (1 - e^{-u})/u with
        # u = beta |E_m - E_n| (the limit beta p_n for degenerate levels).
        u = beta * np.abs(E[:, None] - E[None, :])
        with np.errstate(divide="ignore", invalid="ignore"):
            f = np.where(u < 1e-12, 1.0, -np.expm1(-u) / u)
        P = np.maximum(p[:, None], p[None, :])
        K = beta * float(np.sum(M2 * f * P)) - beta * Mv * Mv
        out["energy"].append(Em)
        out["specificHeat"].append(C)
        out["entropy"].append(Sent)
        out["magnetization"].append(Mv)
        out["susceptibility"].append(MU_B_OVER_K_B * K)
    return out


def main():
    cases = json.load(sys.stdin)
    results = []
    for case in cases:
        H, M = hamiltonian(case["cluster"], case.get("field", [0.0, 0.0, 0.0]))
        if np.max(np.abs(H - H.conj().T)) > 1e-12 * max(1.0, np.max(np.abs(H))):
            raise SystemExit("Hamiltonian not Hermitian for " + case["cluster"].get("name", "?"))
        temps = case.get("temperatures") or []
        res = {}
        if temps:
            E, V = np.linalg.eigh(H)
            res["thermo"] = thermo(E, V, M, temps)
        else:
            E = np.linalg.eigvalsh(H)
        res["energies"] = [float(e) for e in E]
        results.append(res)
    json.dump(results, sys.stdout)


if __name__ == "__main__":
    main()
