"""Radical-pair spin dynamics: exact singlet yields from hyperfine tensors.

This package computes the singlet recombination yield Φ_S of a photo-induced radical
pair (Haberkorn recombination) as a function of the magnetic field vector in the
molecular frame; :mod:`renderer.response.spin_table` turns it into full-sphere
response tables.  Outputs are predictions of a model, not measurements.

Public API (stable; other modules build on it)
-----------------------------------------------
Describing a pair (:mod:`.system`, units mT and s⁻¹, molecular frame)::

    Nucleus(spin, hyperfine_mT (3, 3), name="", gamma_rad_s_T=0.0)
    Nucleus.isotropic(spin, a_mT, name="")
    Nucleus.from_principal(spin, principal_mT (3,), rotation (3, 3) | Rotation, name="")
    Radical(nuclei=[...], g=G_FREE (≈ 2.0023, or a 3×3 g-tensor), name="")
    RadicalPair(a, b, k_s, k_t, exchange_mT=0.0, dipolar_mT=None, g_a=None, g_b=None,
                initial="singlet" | "triplet" | singlet fraction p in [0, 1])
    point_dipolar_mT(distance_nm, direction) -> (3, 3) mT

Costs before a run (:mod:`.planner`)::

    estimate_memory_bytes(pair, method), check_memory(pair, method)

Operators (:mod:`.operators`, dimensionless, complex128, basis m = s, ..., −s)::

    spin_matrices(s) -> (Sx, Sy, Sz);  kron_all([...]);  embed(op, index, dims);
    embed_vector(s, index, dims) -> (3, D, D)

Hamiltonians (:mod:`.hamiltonian`, rad/s; field in T, molecular frame)::

    radical_hamiltonian(radical, field_T (3,) | (K, 3)) -> (2Z, 2Z) | (K, 2Z, 2Z)
    electron_operators(radical) -> (3, 2Z, 2Z)     # electron first, then nuclei
    radical_operators(radical) -> SpinOperators(h0, zeeman, s)  # H = h0 + Σ B_i zeeman[i]
    pair_hamiltonian(pair, field_T) -> (N, N) | (K, N, N)       # space A ⊗ space B
    pair_operators(pair) -> SpinOperators(h0, zeeman, s_a, s_b)
    singlet_projector(pair), singlet_isometry(pair), GAMMA_E, RAD_S_PER_MT

Sign and unit conventions: electron Zeeman H = +(γ_e/g_e) B·g·S, hyperfine γ_e S·A·I,
exchange −2γ_e J S_A·S_B, dipolar γ_e S_A·D·S_B, nuclear Zeeman −γ_n B·I (only when
asked for); γ_e is CODATA's "electron gyromag. ratio" from scipy.constants and
converts every coupling in mT to rad/s.

Yields (:mod:`.solvers`)::

    singlet_yield(pair, field_T (3,) | (N, 3), method="auto") -> float | (N,)
    yields(pair, field_T, method="auto") -> (phi_s, phi_t)
    SOLVERS = {"separable": ..., "eigenbasis": ..., "liouville": ..., "spectral": ...}

Methods: ``separable`` (k_S = k_T, no exchange/dipolar; per-radical eigenbases),
``eigenbasis`` (k_S = k_T, any coupling; Timmel et al. 1998), ``liouville`` (anything;
Sylvester equation for the resolvent), all exact; ``spectral`` (:mod:`.large`: the
separable form by binned line spectra, error bound ``large.DEFAULT_TOL``), which
``auto`` prefers to the direct separable sum above ``solvers.SPECTRAL_ABOVE``.  ``auto``
otherwise picks the first exact method that applies.

Beside the engine, none editing it: :mod:`.large` (equivalent-nucleus blocks, line
spectra, the spectral method), :mod:`.montecarlo` (spin-coherent-state Monte Carlo,
statistical), :mod:`.semiclassical` (Schulten–Wolynes, an approximation and labelled
so), :mod:`.rf` (radio-frequency fields: Floquet, per-radical Floquet spectra, direct
propagation), :mod:`.planner` (cost and memory estimates, ``plan()``, resumable
per-direction runs; memory limit ``MAGRETINA_SPIN_MEMORY_GIB``, default 4 GiB).  Small
dense eigenproblems run their LAPACK work on one BLAS thread (``threadpoolctl``) and
parallelise over directions instead (measured: bench/README.md).

Quantum limit (:mod:`.quantum`; a contract other scripts depend on)::

    direction_information(pair, field_T (3,), kind="quantum" | "yield") -> (2, 2) rad^-2
        # Fisher information about the polar/azimuthal angles (θ, φ) of the field in
        # the molecular frame, one pair: SLD information of the time-averaged density
        # operator (equal rates), or the singlet/triplet readout as one Bernoulli trial

Definition files and presets (:mod:`.definition`)::

    load_pair(name_or_path, k_s=None, k_t=None) -> RadicalPair
    list_presets() -> [names];  read_definition(path) -> RadicalPair
"""

from .hamiltonian import (GAMMA_E, RAD_S_PER_MT, SpinOperators, electron_operators,
                          larmor_frequency_Hz, pair_hamiltonian, pair_operators,
                          radical_hamiltonian, radical_operators, singlet_isometry,
                          singlet_projector)
from .operators import embed, embed_vector, kron_all, spin_matrices
from .quantum import direction_information
from .solvers import SOLVERS, choose_method, singlet_yield, yields
from .definition import list_presets, load_pair, read_definition
from .planner import check_memory, estimate_memory_bytes
from .system import G_FREE, Nucleus, Radical, RadicalPair, point_dipolar_mT

__all__ = [
    "Nucleus", "Radical", "RadicalPair", "singlet_yield", "yields", "SOLVERS", "choose_method",
    "spin_matrices", "kron_all", "embed", "embed_vector",
    "radical_hamiltonian", "radical_operators", "electron_operators", "pair_hamiltonian",
    "pair_operators", "singlet_projector", "singlet_isometry", "SpinOperators",
    "GAMMA_E", "RAD_S_PER_MT", "G_FREE", "larmor_frequency_Hz", "point_dipolar_mT",
    "check_memory", "estimate_memory_bytes", "direction_information", "load_pair", "list_presets", "read_definition",
]

