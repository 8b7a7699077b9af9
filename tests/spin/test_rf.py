"""Singlet yields under an oscillating (RF) field: Floquet, propagation, QuTiP.

References: QuTiP 5 ``mesolve`` (test-only dependency) with the time-dependent
Hamiltonian H₀ + V cos(ωt + φ) and Haberkorn recombination as Lindblad jumps into two
shelf states (trace-preserving, so QuTiP's output normalisation cannot corrupt it);
the exact static solvers of :mod:`renderer.spin` for B₁ → 0; CODATA γ_e via
scipy.constants for the free-electron Larmor frequency γ_e B₀/2π (≈ 1.401 MHz at
50 µT); Thalau et al. 2005 (Naturwissenschaften 92:86) for the qualitative claim that a
field parallel to B₀ acts far less than one at an angle.
"""

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.spin import (Nucleus, Radical, RadicalPair, larmor_frequency_Hz, pair_operators,
                           singlet_isometry, singlet_yield)
from renderer.spin.rf import (RFField, RFNoise, check_single_frequency, floquet_singlet_yield,
                              noise_singlet_yield, propagated_singlet_yield, resonance_spectrum,
                              rf_yield_relative)

from conftest import random_pair, random_tensor

N5 = np.array([[-0.0989, 0.0039, 0.0], [0.0039, -0.0881, 0.0], [0.0, 0.0, 1.7569]])


def _n5_bare(k=1e6, k_t=None):
    """Flavin N5 (Hiscock et al. 2016 tensor, secondary copy) on A, no nuclei on B."""
    return RadicalPair(Radical([Nucleus(1.0, N5, "N5")]), Radical(), k_s=k,
                       k_t=k if k_t is None else k_t)


def test_zero_amplitude_is_static_exactly(rng):
    for pair in (random_pair(rng, spins_a=(1.0,), spins_b=(0.5,)),
                 random_pair(rng, spins_a=(0.5,), spins_b=(0.5,), k_s=2e6, k_t=5e5, exchange_mT=0.1)):
        b0 = np.array([10e-6, -20e-6, 40e-6])
        static = singlet_yield(pair, b0)
        assert floquet_singlet_yield(pair, b0, RFField(0.0, 1.3e6, (1, 0, 0))) == pytest.approx(static, abs=1e-12)
        assert propagated_singlet_yield(pair, b0, []) == pytest.approx(static, abs=1e-10)
        # a tiny field changes Φ_S only at second order
        d = floquet_singlet_yield(pair, b0, RFField(1e-12, 1.3e6, (1, 0, 0))) - static
        assert abs(d) < 1e-12


def test_resonance_at_free_electron_larmor_frequency():
    """A bare electron on B partnered with N5 on A: |ΔΦ_S| peaks at γ_e B₀/2π (CODATA) within
    the grid step of 0.05 MHz, B₀ = 50 µT along z, B₁ = 300 nT along x."""
    pair = _n5_bare()
    b0 = np.array([0.0, 0.0, 50e-6])
    f_larmor = larmor_frequency_Hz(50e-6)
    assert f_larmor == pytest.approx(1.401e6, rel=1e-3)
    freqs = np.arange(0.5e6, 3.0e6, 0.05e6)
    spec = resonance_spectrum(pair, b0, 300e-9, freqs, (1, 0, 0))
    peak = freqs[np.argmax(np.abs(spec.delta))]
    assert abs(peak - f_larmor) <= 0.05e6
    assert np.max(np.abs(spec.delta)) > 10 * np.median(np.abs(spec.delta))


def test_parallel_field_acts_much_less_than_perpendicular():
    """Same amplitude (300 nT) at the Larmor frequency: for N5 + bare electron the effect of an
    RF field parallel to B₀ is < 5 % of the perpendicular one's (measured: 0.01 % for B₀ ∥ z,
    2.5 % for B₀ at 45° in the xz plane)."""
    pair = _n5_bare()
    f = larmor_frequency_Hz(50e-6)
    for d in ([0, 0, 1.0], [1.0, 0, 1.0]):
        b0 = 50e-6 * np.array(d) / np.linalg.norm(d)
        static = singlet_yield(pair, b0)
        par = floquet_singlet_yield(pair, b0, RFField(300e-9, f, b0)) - static
        perp = rf_yield_relative(pair, b0, 300e-9, f, 90.0) - static
        assert abs(par) < 0.05 * abs(perp)


def test_floquet_matches_propagation_unequal_rates():
    """Floquet (phase-averaged) against direct propagation averaged over 4 start phases, k_S ≠ k_T.
    The phase dependence has only even harmonics; those of order ≥ 4 are of relative size
    (γB₁/ω)⁴ ≈ 2e-7, so 4 phases suffice.  Propagation is second order in dt: Richardson
    extrapolation from 32 and 64 steps per period removes the leading error."""
    pair = _n5_bare(k=3e6, k_t=1e6)
    b0 = np.array([0.0, 0.0, 50e-6])

    def prop(n):
        return np.mean([propagated_singlet_yield(pair, b0, RFField(1e-6, 1.401e6, (1, 0, 0), np.pi * j / 2),
                                                 steps_per_period=n, tail_tol=1e-9) for j in range(4)])

    extrapolated = (4 * prop(64) - prop(32)) / 3
    assert floquet_singlet_yield(pair, b0, RFField(1e-6, 1.401e6, (1, 0, 0))) == pytest.approx(extrapolated, abs=1e-7)


def test_inversion_symmetry_with_rf(rng):
    """Phase-averaged yields are unchanged by B₀ → −B₀ (checked here numerically, with and
    without flipping B₁), which lets RF tables solve one node of each antipodal pair."""
    pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,))
    b0 = np.array([10e-6, 20e-6, 40e-6])
    rf = RFField(2e-6, 1.3e6, (1.0, 0.3, -0.2))
    ref = floquet_singlet_yield(pair, b0, rf)
    assert floquet_singlet_yield(pair, -b0, rf) == pytest.approx(ref, abs=1e-12)
    assert rf_yield_relative(pair, -b0, 2e-6, 1.3e6, 30.0) == pytest.approx(
        rf_yield_relative(pair, b0, 2e-6, 1.3e6, 30.0), abs=1e-12)


def _qutip_yield(pair, b0, rf, t_end_us):
    """Φ_S from QuTiP mesolve: H in rad/µs, jumps √k_S|S⟩⟨s_j| and √k_T|T⟩⟨t_j| into shelves."""
    qutip = pytest.importorskip("qutip")
    ops = pair_operators(pair)
    d = ops.dim
    h0 = ops.hamiltonian(b0) * 1e-6
    v = np.tensordot(rf.vector_T, ops.zeeman, axes=([0], [0])) * 1e-6
    big = lambda m: np.pad(m, ((0, 2), (0, 2)))
    q = singlet_isometry(pair)
    u, _, _ = np.linalg.svd(np.eye(d) - q @ q.conj().T)
    t = u[:, : d - q.shape[1]]
    c_ops = []
    for basis, shelf, k in ((q, d, pair.k_s), (t, d + 1, pair.k_t)):
        for j in range(basis.shape[1]):
            c = np.zeros((d + 2, d + 2), dtype=complex)
            c[shelf, :d] = np.sqrt(k * 1e-6) * basis[:, j].conj()
            c_ops.append(qutip.Qobj(c))
    rho0 = big(q @ q.conj().T / pair.nuclear_multiplicity)
    w, ph = rf.omega_rad_s * 1e-6, rf.phase
    h = [qutip.Qobj(big(h0)), [qutip.Qobj(big(v)), lambda tt: np.cos(w * tt + ph)]]
    res = qutip.mesolve(h, qutip.Qobj(rho0), [0.0, t_end_us], c_ops,
                        options={"atol": 1e-12, "rtol": 1e-10, "nsteps": 10**6,
                                 "normalize_output": False})
    return float(np.real(res.states[-1].full()[d, d]))


def test_qutip_time_dependent_agrees():
    """Small system (one anisotropic spin-1/2 on A, bare B; B₁ = 10 µT at 1.2 MHz, 60° to B₀,
    k = 2e7 s⁻¹): QuTiP's time-dependent propagation agrees with ours at a fixed phase (1e-6:
    our step error is second order, 256 steps per period), and the QuTiP mean over 6 formation
    phases agrees with the Floquet yield (1e-6; phase harmonics of order ≥ 6 are of relative size
    (γB₁/ω)⁶ ≈ 4e-6 times a phase modulation of ≈ 1e-2)."""
    rng = np.random.default_rng(7)
    pair = RadicalPair(Radical([Nucleus(0.5, random_tensor(rng, 0.4))]), Radical(), k_s=2e7, k_t=2e7)
    b0 = np.array([0.0, 0.0, 50e-6])
    d = np.array([np.sin(np.pi / 3), 0.0, np.cos(np.pi / 3)])
    t_end = 25.0 / 20.0  # µs; e^-25 of the pair is left
    phases = 2 * np.pi * np.arange(6) / 6
    qt = [_qutip_yield(pair, b0, RFField(10e-6, 1.2e6, d, p), t_end) for p in phases]
    ours = propagated_singlet_yield(pair, b0, RFField(10e-6, 1.2e6, d, phases[3]), steps_per_period=256)
    assert ours == pytest.approx(qt[3], abs=1e-6)
    assert floquet_singlet_yield(pair, b0, RFField(10e-6, 1.2e6, d)) == pytest.approx(np.mean(qt), abs=1e-6)
    assert np.ptp(qt) > 1e-4  # the phase matters at fixed phase, so the average is a real check


def test_noise_seeded_and_bounded():
    """Broadband noise: seeded realisations are reproducible; zero rms gives the static yield."""
    pair = _n5_bare(k=5e6)
    b0 = np.array([0.0, 0.0, 50e-6])
    noise = RFNoise(200e-9, 0.5e6, 3e6, n_components=6, direction=(1, 0, 0), seed=4)
    assert noise.components(0) == noise.components(0)
    assert noise.components(0) != noise.components(1)
    amps = [c.amplitude_T for c in noise.components(0)]
    assert np.sqrt(np.sum(np.square(amps)) / 2) == pytest.approx(200e-9)
    quiet = RFNoise(0.0, 0.5e6, 3e6, n_components=3, seed=4)
    m0, _ = noise_singlet_yield(pair, b0, quiet, n_realisations=2, steps_per_period=16)
    assert m0 == pytest.approx(singlet_yield(pair, b0), abs=1e-9)


def test_bad_input_messages():
    with pytest.raises(MagretinaError, match="frequency_Hz"):
        RFField(1e-7, 0.0)
    with pytest.raises(MagretinaError, match="frequency_Hz"):
        RFField(1e-7, -1e6)
    with pytest.raises(MagretinaError, match="weak-perturbation"):
        floquet_singlet_yield(_n5_bare(), np.array([0, 0, 50e-6]), RFField(60e-6, 1.4e6))
    comps = RFNoise(1e-7, 1e6, 2e6, n_components=3).components()
    with pytest.raises(MagretinaError, match="one RF frequency"):
        check_single_frequency(comps)
    with pytest.raises(MagretinaError, match="one RF frequency"):
        floquet_singlet_yield(_n5_bare(), np.array([0, 0, 50e-6]), comps)
    with pytest.raises(MagretinaError, match="direction"):
        RFField(1e-7, 1e6, (0, 0, 0))
    with pytest.raises(MagretinaError, match="f_min"):
        RFNoise(1e-7, 2e6, 1e6)


def test_rf_response_table_plugs_into_response_interface(tmp_path):
    """A full-sphere table with the RF on is a spine SpinTable (evaluate_dirs, sphere_lut,
    axial_average).  B₁ = 0 reproduces the spine's static table (compute_spin_table, independent
    code) to round-off; a 1 µT Larmor-frequency field perpendicular to B₀ lowers the mean yield
    of this N5 + bare-electron pair."""
    from renderer.response.spin_table import compute_spin_table
    from renderer.response.spin_table import compute_table

    pair = _n5_bare()
    f = larmor_frequency_Hz(50e-6)
    static = compute_spin_table(pair, 50e-6, lmax=2, use_cache=False)

    def table(amp):
        return compute_table(lambda b: rf_yield_relative(pair, b, amp, f, 90.0), 50e-6,
                             {"pair": pair.describe(), "amp": amp}, lmax=2, run_dir=tmp_path)

    off = table(0.0)
    assert np.max(np.abs(off.coeffs - static.coeffs)) < 1e-12
    on = table(1e-6)
    assert on.mean() < static.mean() - 1e-5
    assert on.sphere_lut(5, 9).shape == (5, 9)
    assert np.isfinite(on.axial_average()(np.array([0.0, 1.0]))).all()
    assert on.evaluate_dirs(np.array([[0.0, 0.0, 1.0]])).shape == (1,)


def test_config_tables_for_study_timelines():
    """Trade units at the edge: nT and MHz (DESIGN conventions); bad keys are named."""
    from renderer.errors import ConfigError
    from renderer.study.rfconfig import rf_from_config

    rf = rf_from_config({"amplitude_nT": 480, "frequency_MHz": 1.315, "direction": [0, 0, 1]})
    assert rf.amplitude_T == pytest.approx(480e-9) and rf.frequency_Hz == pytest.approx(1.315e6)
    noise = rf_from_config({"rms_nT": 10, "f_min_MHz": 0.05, "f_max_MHz": 5, "seed": 3})
    assert isinstance(noise, RFNoise) and len(noise.components()) == 16
    with pytest.raises(ConfigError, match="rf.amplitud"):
        rf_from_config({"amplitud_nT": 1, "frequency_MHz": 1})
    with pytest.raises(MagretinaError, match="rf: RF field frequency_Hz"):
        rf_from_config({"amplitude_nT": 1, "frequency_MHz": 0})
    with pytest.raises(MagretinaError, match="rf.frequency_MHz is required"):
        rf_from_config({"amplitude_nT": 1})


def test_per_radical_floquet_matches_pair_floquet():
    """Per-radical Floquet spectra convolved (equal rates, uncoupled radicals) reproduce the
    pair-space Floquet yield within the returned binning bound, with and without RF, for the
    flavin N5 + tryptophan N1 preset (Hiscock et al. 2016 tensors, secondary copy)."""
    from renderer.spin import load_pair
    from renderer.spin.rf import floquet_separable_yield

    pair = load_pair("fad-trp-n5-n1")
    b0 = 50e-6 * np.array([0.5, 0.0, np.sqrt(0.75)])
    for rf in (RFField(0.0, 1.4e6, (0, 1, 0)), RFField(5e-6, 1.2e6, (1, 1, 0))):
        ref = floquet_singlet_yield(pair, b0, rf)
        got, info = floquet_separable_yield(pair, b0, rf, tol=1e-6, return_info=True)
        assert info["bound"] <= 1e-6 * (1 + 1e-9) and abs(got - ref) <= info["bound"]
    with pytest.raises(MagretinaError, match="equal rates"):
        floquet_separable_yield(_n5_bare(k=1e6, k_t=2e6), b0, RFField(1e-7, 1e6))
