"""Spin of unrestricted calculations: expected <S^2> and the spin-contamination rule.

A dimer of two open-shell fragments is computed high-spin by default (S = S_A + S_B).
With a lower ``dimer_multiplicity`` (only S = |S_A - S_B| is offered) the dimer is a
broken-symmetry (BS) unrestricted determinant: the fragment densities with the spin of
one fragment flipped (B, or the fragment with fewer unpaired electrons). A BS
determinant is not a spin eigenfunction; for non-overlapping magnetic orbitals its
<S^2> is

    <S^2>_BS = M(M + 1) + 2 S_small,   M = |S_A - S_B|, S_small = min(S_A, S_B),

(e.g. 1 for two doublets), and it falls towards M(M + 1) as the magnetic orbitals
overlap (standard result of the broken-symmetry approach, Noodleman, J. Chem. Phys.
74, 5737 (1981); recalled from memory).

Rule for the ``status`` flag ``spin-contaminated`` (every unrestricted calculation):

- spin eigenstate expected (high-spin dimer, every monomer): flagged when
  |<S^2> - S(S+1)| > :data:`SPIN_CONTAMINATION_TOLERANCE` (0.1; a common-practice
  threshold);
- broken-symmetry dimer: flagged when <S^2> > <S^2>_BS + 0.1, i.e. contamination
  beyond the two-state mixing the BS determinant carries by construction (values
  down to M(M+1) are expected and not flagged).
"""

from __future__ import annotations

#: largest accepted deviation of <S^2> from its expected value (common practice)
SPIN_CONTAMINATION_TOLERANCE = 0.1
#: guess recipe of a broken-symmetry job (recorded in the job description and key)
BROKEN_SYMMETRY_GUESS = "broken-symmetry from fragment densities"


def flipped_fragment(spins: tuple[int, int]) -> int:
    """Index (0 = A, 1 = B) of the fragment whose spin a broken-symmetry guess flips:
    B, unless A has fewer unpaired electrons (keeps the dimer's M_S >= 0)."""
    return 0 if spins[0] < spins[1] else 1


def broken_symmetry_spins(spins: tuple[int, int]) -> tuple[int, int]:
    """Signed 2M_S of each fragment in the broken-symmetry guess, e.g. (1, -1)."""
    flip = flipped_fragment(spins)
    return tuple(-s if k == flip else s for k, s in enumerate(spins))  # type: ignore[return-value]


def expected_spin_square(spin: int, fragment_spins: tuple[int, ...] = ()) -> tuple[float, float]:
    """Range of <S^2> expected for a calculation.

    Parameters
    ----------
    spin : int
        2S (= 2M_S) of the calculation.
    fragment_spins : tuple of int
        Signed 2M_S of the fragments for a broken-symmetry job; empty otherwise.

    Returns
    -------
    (low, high) : floats
        S(S+1) twice for a spin eigenstate; M(M+1) and <S^2>_BS for a
        broken-symmetry determinant.
    """
    m = spin / 2.0
    pure = m * (m + 1.0)
    if not fragment_spins:
        return pure, pure
    flipped = min(abs(s) for s in fragment_spins if s < 0) if any(s < 0 for s in fragment_spins) else 0
    return pure, pure + float(flipped)


def spin_contaminated(s2: float, spin: int, fragment_spins: tuple[int, ...] = ()) -> bool:
    """True when <S^2> ``s2`` breaks the rule of the module docstring."""
    low, high = expected_spin_square(spin, fragment_spins)
    tol = SPIN_CONTAMINATION_TOLERANCE
    if fragment_spins:
        return s2 > high + tol
    return abs(s2 - low) > tol


def is_unrestricted_job(job) -> bool:
    """True for jobs computed with UHF/UKS: open shells and broken-symmetry dimers."""
    return job.spin != 0 or job.guess == BROKEN_SYMMETRY_GUESS


def spin_note(job, record: dict) -> str | None:
    """Why a converged unrestricted calculation is flagged, or None when it is not.

    A record without ``spin_square`` (stored before <S^2> was recorded) is flagged
    too: its spin state cannot be vouched for.
    """
    if not is_unrestricted_job(job):
        return None
    s2 = record.get("spin_square")
    if s2 is None:
        return "<S^2> not recorded (stored by an older interkit); recompute to check the spin state"
    bs = job.fragment_spins if job.guess == BROKEN_SYMMETRY_GUESS else ()
    if not spin_contaminated(float(s2), job.spin, bs):
        return None
    low, high = expected_spin_square(job.spin, bs)
    expected = f"{low:.2f}" if not bs else f"at most {high:.2f} (broken symmetry)"
    return (f"heavy spin contamination: <S^2> = {float(s2):.3f}, expected {expected} "
            f"within {SPIN_CONTAMINATION_TOLERANCE}")
