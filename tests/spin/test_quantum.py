"""Quantum and yield Fisher information about the field direction (renderer.spin.quantum).

References:
* Braunstein & Caves 1994 (PRL 72:3439): the SLD quantum Fisher information bounds the
  classical Fisher information of every measurement, F_Q − F_C ⪰ 0; for pure states it
  is 4(⟨∂ψ|∂ψ⟩ − |⟨ψ|∂ψ⟩|²); the Bures distance d_B² = 2(1 − √F) of neighbouring states
  is F_Q dθ²/4 to second order.
* Smith, Glatthard, Chowdhury & Kattnig 2024 (arXiv:2401.02923): the time-averaged
  density operator ρ̄ = k ∫ e^{−kt} ρ(t) dt and the yield readout as one Bernoulli trial.
* QuTiP 5 (Lambert et al. 2024) as the independent builder of ρ̄ (Liouvillian superoperator
  of H solved for (k − L)ρ̄ = kρ0) and of the fidelity (``qutip.fidelity``).
"""

import numpy as np
import pytest
import qutip

from renderer.errors import MagretinaError
from renderer.spin import Nucleus, Radical, RadicalPair, direction_information, singlet_yield
from renderer.spin.hamiltonian import GAMMA_E, RAD_S_PER_MT
from renderer.response.information_table import compute_information_table
from renderer.spin.quantum import (information_on_directions, sld_fisher, tangent_frame,
                                   time_averaged_state)
from conftest import random_fields, random_pair


def _angles(b):
    r = np.linalg.norm(b)
    return np.arccos(b[2] / r), np.arctan2(b[1], b[0]), r


def _field(th, ph, r):
    return r * np.array([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)])


def test_quantum_bound_dominates_yield_information(rng):
    """F_Q − F_C is positive semidefinite (Braunstein & Caves 1994): the singlet/triplet
    readout is one two-outcome measurement of ρ̄.  Random pairs (with exchange, dipolar
    coupling and a mixed initial state too) and random directions; tolerance 1e-9 of
    ‖F_Q‖ (double-precision eigendecompositions of dimension ≤ 24)."""
    cases = [dict(), dict(exchange_mT=0.1), dict(dipolar_mT=np.diag([-0.2, -0.2, 0.4])),
             dict(initial=0.6)]
    for kw in cases:
        pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), **kw)
        for b in random_fields(rng, 6):
            fq = direction_information(pair, b, "quantum")
            fc = direction_information(pair, b, "yield")
            assert np.linalg.eigvalsh(fq - fc).min() >= -1e-9 * np.abs(fq).max()
            assert np.allclose(fq, fq.T) and np.allclose(fc, fc.T)


def test_pure_state_reduction(rng):
    """A rank-one family: sld_fisher must equal 4(⟨∂ψ|∂ψ⟩ − |⟨ψ|∂ψ⟩|²) (Braunstein & Caves
    1994) although ρ has a (N − 1)-dimensional kernel.  Tolerance 1e-10 relative
    (one eigendecomposition of dimension 8)."""
    n = 8
    for _ in range(5):
        psi = rng.normal(size=n) + 1j * rng.normal(size=n)
        psi /= np.linalg.norm(psi)
        d1 = rng.normal(size=n) + 1j * rng.normal(size=n)
        d2 = rng.normal(size=n) + 1j * rng.normal(size=n)
        # keep ψ normalised to first order: remove the real part of ⟨ψ|∂ψ⟩
        d1 -= np.real(np.vdot(psi, d1)) * psi
        d2 -= np.real(np.vdot(psi, d2)) * psi
        rho = np.outer(psi, psi.conj())
        drs = [np.outer(d, psi.conj()) + np.outer(psi, d.conj()) for d in (d1, d2)]
        f = sld_fisher(rho, drs)
        ref = np.empty((2, 2))
        for i, a in enumerate((d1, d2)):
            for j, b in enumerate((d1, d2)):
                ref[i, j] = 4 * np.real(np.vdot(a, b) - np.vdot(a, psi) * np.vdot(psi, b))
        assert np.allclose(f, ref, rtol=1e-10, atol=1e-12)


def test_support_violation_is_rejected():
    """A 'derivative' with weight on the kernel block is no family of states (ρ would turn
    negative); the rank-deficient branch must say so rather than drop it silently."""
    rho = np.diag([1.0, 0.0])
    with pytest.raises(MagretinaError, match="support"):
        sld_fisher(rho, [np.diag([0.0, 1.0])])


def _qutip_steady(pair, b):
    """ρ̄ built with QuTiP from H written out independently here (electron A ⊗ nuclei A ⊗
    electron B ⊗ nuclei B): Zeeman γ_e B·S, hyperfine γ_e S·A·I, rad/s → rad/µs."""
    def radical_ops(rad):
        dims = [2] + [int(round(2 * n.spin + 1)) for n in rad.nuclei]
        eye = [qutip.qeye(d) for d in dims]

        def emb(op, k):
            ops = list(eye)
            ops[k] = op
            return qutip.tensor(ops)
        s = [emb(qutip.jmat(0.5, c), 0) for c in "xyz"]
        h = 0 * s[0]
        for k, nuc in enumerate(rad.nuclei):
            ii = [emb(qutip.jmat(nuc.spin, c), k + 1) for c in "xyz"]
            a = nuc.hyperfine_mT * RAD_S_PER_MT * 1e-6
            for i in range(3):
                for j in range(3):
                    h = h + a[i, j] * s[i] * ii[j]
        return s, h, dims
    sa, ha, da = radical_ops(pair.a)
    sb, hb, db = radical_ops(pair.b)
    ia, ib = qutip.qeye(da), qutip.qeye(db)
    s_a = [qutip.tensor(x, ib) for x in sa]
    s_b = [qutip.tensor(ia, x) for x in sb]
    h = qutip.tensor(ha, ib) + qutip.tensor(ia, hb)
    for i in range(3):
        h = h + GAMMA_E * 1e-6 * b[i] * (s_a[i] + s_b[i])
    n = h.shape[0]
    ps = 0.25 - sum(x * y for x, y in zip(s_a, s_b))
    rho0 = ps / ps.tr()
    k = pair.k_s * 1e-6
    lm = qutip.liouvillian(h).full()
    vec = np.linalg.solve(k * np.eye(n * n) - lm, k * qutip.operator_to_vector(rho0).full().ravel())
    return vec.reshape(n, n, order="F"), ps.full()


def _one_nucleus_pair():
    a = Radical([Nucleus.from_principal(1, [-0.1, 0.05, 1.0812])])
    return RadicalPair(a, Radical(), k_s=1e6, k_t=1e6)


def test_one_nucleus_state_against_qutip():
    """ρ̄ for one 14N against QuTiP's Liouvillian solve, to 1e-10 (direct linear solve of a
    36 × 36 system); Tr P_S ρ̄ is the Timmel et al. 1998 singlet yield."""
    pair = _one_nucleus_pair()
    b = _field(1.1, 0.4, 50e-6)
    ref, ps = _qutip_steady(pair, b)
    ours = time_averaged_state(pair, b)
    assert np.abs(ours - ref).max() < 1e-10
    assert abs(np.trace(ps @ ours).real - singlet_yield(pair, b)) < 1e-12


def test_one_nucleus_information_against_qutip_finite_differences():
    """Quantum information from QuTiP-built ρ̄ with central-difference derivatives
    (step 1e-5 rad: truncation ~1e-10, rounding ~1e-11 relative) fed to the SLD formula,
    against the analytic Sylvester derivatives; tolerance 1e-6 relative."""
    pair = _one_nucleus_pair()
    th, ph, r = 1.1, 0.4, 50e-6
    h = 1e-5
    rho, _ = _qutip_steady(pair, _field(th, ph, r))
    d_th = (_qutip_steady(pair, _field(th + h, ph, r))[0]
            - _qutip_steady(pair, _field(th - h, ph, r))[0]) / (2 * h)
    d_ph = (_qutip_steady(pair, _field(th, ph + h, r))[0]
            - _qutip_steady(pair, _field(th, ph - h, r))[0]) / (2 * h)
    herm = [0.5 * (d + d.conj().T) for d in (d_th, d_ph)]
    ref = sld_fisher(0.5 * (rho + rho.conj().T), herm)
    ours = direction_information(pair, _field(th, ph, r), "quantum")
    assert np.allclose(ours, ref, rtol=1e-6, atol=1e-9 * np.abs(ref).max())


def test_sld_against_bures_fidelity(rng):
    """SLD information along θ against 8(1 − √F)/δ², F = qutip.fidelity(ρ̄(θ−δ/2),
    ρ̄(θ+δ/2))²: Bures metric (Braunstein & Caves 1994).  δ = 2e-3 rad: truncation
    O(δ²) ≈ 1e-6 relative; fidelity round-off ≈ 1e-14 on 1 − √F ≈ 1e-7 gives ≈ 1e-7;
    tolerance 1e-4 relative."""
    pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,))
    for b in random_fields(rng, 2):
        th, ph, r = _angles(b)
        d = 2e-3
        rm = qutip.Qobj(time_averaged_state(pair, _field(th - d / 2, ph, r)))
        rp = qutip.Qobj(time_averaged_state(pair, _field(th + d / 2, ph, r)))
        fid = qutip.fidelity(rm, rp)          # QuTiP returns √F (Uhlmann root fidelity)
        bures = 8 * (1 - fid) / d**2
        f_thth = direction_information(pair, b, "quantum")[0, 0]
        assert bures == pytest.approx(f_thth, rel=1e-4)


def test_yield_information_matches_yield_derivative(rng):
    """Yield information = (∂Φ)²/(Φ(1−Φ)) with ∂Φ from central differences of the
    independent Timmel et al. 1998 eigenbasis yield (step 1e-5: error ~1e-10 relative);
    tolerance 1e-6 relative."""
    pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), exchange_mT=0.05)
    b = random_fields(rng, 1)[0]
    th, ph, r = _angles(b)
    h = 1e-5
    phi = singlet_yield(pair, b)
    g = np.array([(singlet_yield(pair, _field(th + h, ph, r)) - singlet_yield(pair, _field(th - h, ph, r))),
                  (singlet_yield(pair, _field(th, ph + h, r)) - singlet_yield(pair, _field(th, ph - h, r)))]) / (2 * h)
    ref = np.outer(g, g) / (phi * (1 - phi))
    assert np.allclose(direction_information(pair, b, "yield"), ref, rtol=1e-6,
                       atol=1e-9 * np.abs(ref).max())


def test_table_yield_antipodes_and_quantum_asymmetry(rng, tmp_path, monkeypatch):
    """Time reversal makes Φ_S(B) = Φ_S(−B) (Timmel et al. 1998; checked in REFERENCES), so
    the yield information at −n is T F_C(n) Tᵀ (to 1e-9 relative).  The quantum
    information need not be: ρ̄(−B) is the time-reversed ρ̄(B) only up to a transpose in
    H's eigenbasis, and for a general pair the two differ by far more than round-off.
    Tr F_Q ≥ Tr F_C everywhere; the second call comes from the cache."""
    from renderer.response.spin_table import antipodal_pairs
    from renderer.spin.quantum import antipode_transform

    monkeypatch.setenv("MAGRETINA_CACHE", str(tmp_path))
    pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,))
    t = compute_information_table(pair, 50e-6, order=7)
    keep, partner = antipodal_pairs(t.nodes)
    scale_c = np.abs(t.yield_).max()
    gap_q = 0.0
    for i, j in zip(keep, partner):
        m = antipode_transform(t.nodes[i])
        assert np.abs(m @ t.yield_[i] @ m.T - t.yield_[j]).max() < 1e-9 * scale_c
        assert t.phi_s[i] == pytest.approx(t.phi_s[j], abs=1e-13)
        gap_q = max(gap_q, np.abs(m @ t.quantum[i] @ m.T - t.quantum[j]).max())
    assert gap_q > 1e-3 * np.abs(t.quantum).max()
    assert np.all(t.trace_quantum >= t.trace_yield - 1e-9 * np.abs(t.quantum).max())
    again = compute_information_table(pair, 50e-6, order=7)
    assert again.meta.get("from_cache") and np.array_equal(again.quantum, t.quantum)


def test_tangent_frame_is_orthonormal_and_api_rejects_bad_input(rng):
    """e_θ, e_φ, n form an orthonormal right-handed triad (common practice, spherical
    coordinates), including at the poles; bad kinds and zero fields raise."""
    n = random_fields(rng, 5, 1.0)
    n = np.vstack([n, [[0, 0, 1.0], [0, 0, -1.0]]])
    f = tangent_frame(n)
    for i in range(len(n)):
        m = np.vstack([f[i], n[i]])
        assert np.allclose(m @ m.T, np.eye(3), atol=1e-12)
        assert np.linalg.det(m) == pytest.approx(1.0)
    pair = random_pair(rng)
    with pytest.raises(MagretinaError, match="kind"):
        direction_information(pair, [0, 0, 5e-5], kind="both")
    with pytest.raises(MagretinaError, match="zero"):
        direction_information(pair, [0, 0, 0.0])
    with pytest.raises(MagretinaError, match="equal rates"):
        direction_information(random_pair(rng, k_t=2e6), [0, 0, 5e-5])
