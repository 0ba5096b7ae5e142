"""Whether a compared run's modelled peaks hold when the model step is halved.

A run that forms vapour cavities (column separation) has, where a cavity collapses, a
pressure spike whose size depends on the computational grid of the discrete vapour cavity
model (Bergant, A., Simpson, A. R. & Tijsseling, A. S. (2006) Water hammer with column
separation: a historical review, J. Fluids Struct. 22(2), 135-171; from memory). Such a
modelled peak is no yardstick for the field: the comparison reruns the separated case at
twice the steps per sample and, at each logger whose modelled peak or trough is not settled
to within the peak tolerance, does not compare that extreme with the field.

How settled the compared run's extreme is comes from the two runs by Richardson's
extrapolation: with a scheme of order ``p`` and steps in the ratio ``r = 2``, the error of
the coarser run is ``r^p / (r^p - 1)`` times the difference between the two (Richardson,
L. F. (1911) Phil. Trans. R. Soc. A 210, 307-357; Roache, P. J. (1998) Verification and
Validation in Computational Science and Engineering, ch. 5; from memory). The MOC with
friction and vapour cavities is taken as first order (``p = 1``: twice the difference),
and a collapse spike converges no faster, if at all (its peak in a field trial fell by
about the same 45-50 kPa at each halving from 1 to 8 steps per sample), so the estimate
errs on the side of not comparing. The measured extremes are still checked against the pipe's allowable and minimum
pressures (:func:`service.flags.limit_flags`), which do not depend on the model.
"""

from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

__all__ = ["cavity_caution", "unconverged_extremes", "unconverged_note",
           "STEP_ERROR_PER_DIFFERENCE"]

#: Error of the compared run's extreme per unit of its change when the step is halved,
#: ``r^p / (r^p - 1)`` for ``r = 2``, ``p = 1`` (Richardson 1911; module docstring) [-].
STEP_ERROR_PER_DIFFERENCE = 2.0


def unconverged_extremes(compared_kpa: np.ndarray, finer_kpa: np.ndarray, baseline_kpa: float,
                         tolerance_percent: float) -> dict[str, tuple[float, float]]:
    """The modelled extremes of one logger that move with the step.

    Parameters
    ----------
    compared_kpa, finer_kpa : ndarray
        Modelled gauge pressure at the logger's sample times, from the compared run and
        from the run at twice its steps per sample [kPa].
    baseline_kpa : float
        The logger's pre-event pressure [kPa].
    tolerance_percent : float
        The comparison's peak tolerance, in percent of the modelled surge amplitude (the
        compared run's larger excursion from the baseline, up or down; at least 1 kPa),
        the same scale the field-worse check uses [-].

    Returns
    -------
    dict
        ``{"max": (compared, finer)}`` and/or ``{"min": ...}`` for each extreme whose
        estimated step error, ``2 |finer - compared|`` (first-order Richardson estimate for
        the compared run; module docstring), exceeds the tolerance [kPa]; empty when both
        hold.
    """
    ok_c, ok_f = np.isfinite(compared_kpa), np.isfinite(finer_kpa)
    if not ok_c.any() or not ok_f.any():
        return {}
    extremes = {"max": (float(np.max(compared_kpa[ok_c])), float(np.max(finer_kpa[ok_f]))),
                "min": (float(np.min(compared_kpa[ok_c])), float(np.min(finer_kpa[ok_f])))}
    scale = max(extremes["max"][0] - baseline_kpa, baseline_kpa - extremes["min"][0], 1.0)
    return {which: pair for which, pair in extremes.items()
            if STEP_ERROR_PER_DIFFERENCE * abs(pair[1] - pair[0])
            > tolerance_percent / 100.0 * scale}


def unconverged_note(moved: Mapping[str, tuple[float, float]], steps: Sequence[float],
                     tolerance_percent: float) -> str:
    """The row's note for extremes that :func:`unconverged_extremes` found moving ('' if none)."""
    if not moved:
        return ""
    words = {"max": "peak", "min": "trough"}
    parts = [f"{words[which]} {compared:.0f} kPa at {steps[0]:.1f} steps per driving sample, "
             f"{finer:.0f} kPa at {steps[1]:.1f}" for which, (compared, finer) in moved.items()]
    which = " and ".join(words[w] for w in moved)
    return (f"modelled {which} not converged after a vapour-cavity collapse ("
            + "; ".join(parts) + f"; {STEP_ERROR_PER_DIFFERENCE:g} times the change, the "
            f"first-order estimate of the step error, exceeds the {tolerance_percent:g} % peak "
            f"tolerance): the modelled {which} is not compared with the field (no field-worse "
            "flag on it); the measured pressures are still checked against the pipe's "
            "allowable and minimum pressures")


def cavity_caution(pipes) -> str:
    """What a compared run with column separation means for its peaks ('' when none).

    A modelled peak after a collapse is uncertain by more than the fit says (see the
    module docstring).
    """
    if not pipes:
        return ""
    return (f"the compared run formed vapour cavities (column separation) on pipe(s) "
            f"{', '.join(sorted(pipes))}: a modelled peak after a cavity collapses depends on "
            "the model step, so read a difference there with care")
