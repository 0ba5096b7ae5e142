"""Plain numpy twin of the compiled interior update (:func:`models.moc_kernel.interior_step`).

Straightforward numpy: whole-array operations per pipe and time step, no loop over points,
no numba, no needless copies (views, in-place envelope). It is the reference the tests
compare the kernel with and the fair baseline the benchmark measures it against. Same
arrays, same equations, same discrete vapour cavity model (taken only where a head falls
below vapour head or a cavity is open, as in the kernel).
"""

from __future__ import annotations

import numpy as np

__all__ = ["reference_interior_step", "reference_advance_interior",
           "reference_advance_interior_state"]


def reference_interior_step(pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                            H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn, hmax, hmin,
                            vol, rate, dt):
    """One interior step of every pipe (see the compiled kernel for the equations).

    Updates ``Hn, Qun, Qdn, hmax, hmin, vol, rate`` in place (cavity statistics are the
    kernel's business and not repeated here).
    """
    for p in range(pipe_first.size):
        first = pipe_first[p]
        last = first + pipe_reaches[p]
        if last - first < 2:
            continue
        B, R, kb = pipe_B[p], pipe_R[p], pipe_kb[p]
        i = slice(first + 1, last)
        a = slice(first, last - 1)
        b = slice(first + 2, last + 1)
        qa, qb = Qd[a], Qu[b]
        cp = H[a] + qa * (B - R * np.abs(qa))
        cm = H[b] - qb * (B - R * np.abs(qb))
        if kb != 0.0:
            cp -= kb * ((qa - Qd_prev[a]) + np.sign(qa) * np.abs(Qu[i] - qa))
            cm += kb * ((qb - Qu_prev[b]) + np.sign(qb) * np.abs(qb - Qd[i]))
        hp = 0.5 * (cp + cm)
        q = (cp - cm) / (2.0 * B)
        Hn[i], Qun[i], Qdn[i] = hp, q, q
        if vol[i].any() or (hp < hv[i]).any():
            _cavity_points(i, cp, cm, B, hv, dt, Hn, Qun, Qdn, vol, rate)
        np.maximum(hmax[i], Hn[i], out=hmax[i])
        np.minimum(hmin[i], Hn[i], out=hmin[i])


def _cavity_points(i, cp, cm, B, hv, dt, Hn, Qun, Qdn, vol, rate):
    """Discrete vapour cavity model at the points of slice ``i`` that need it."""
    cavity = (vol[i] > 0.0) | (Hn[i] < hv[i])
    hc = hv[i][cavity]
    cu = (cp[cavity] - hc) / B
    cd = (hc - cm[cavity]) / B
    new_rate = cd - cu
    v_new = vol[i][cavity] + 0.5 * dt * (new_rate + rate[i][cavity])
    keep = v_new > 0.0
    h_new, qu_new, qd_new = Hn[i], Qun[i], Qdn[i]
    h_new[cavity] = np.where(keep, hc, h_new[cavity])
    qu_new[cavity] = np.where(keep, cu, qu_new[cavity])
    qd_new[cavity] = np.where(keep, cd, qd_new[cavity])
    vol_i, rate_i = vol[i], rate[i]
    vol_i[cavity] = np.where(keep, v_new, 0.0)
    rate_i[cavity] = np.where(keep, new_rate, 0.0)


def reference_advance_interior(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                               H, Qu, Qd, dt):
    """Twin of :func:`models.moc_kernel.advance_interior`: interior only, ends held."""
    return reference_advance_interior_state(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R,
                                            pipe_kb, hv, H, Qu, Qd, dt)[0]


def reference_advance_interior_state(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R,
                                     pipe_kb, hv, H, Qu, Qd, dt):
    """Twin of :func:`models.moc_kernel.advance_interior_state`:
    (H, Qu, Qd, max H, min H, cavity volume)."""
    H, Qu, Qd = H.copy(), Qu.copy(), Qd.copy()
    Hn, Qun, Qdn = H.copy(), Qu.copy(), Qd.copy()
    Qu_prev, Qd_prev = Qu.copy(), Qd.copy()
    hmax, hmin = H.copy(), H.copy()
    vol, rate = np.zeros(H.size), np.zeros(H.size)
    for _ in range(n_steps):
        reference_interior_step(pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv, H, Qu,
                                Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn, hmax, hmin, vol, rate, dt)
        H, Hn = Hn, H
        Qu_prev, Qu, Qun = Qu, Qun, Qu_prev
        Qd_prev, Qd, Qdn = Qd, Qdn, Qd_prev
    return H, Qu, Qd, hmax, hmin, vol
