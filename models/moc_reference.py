"""Plain numpy twin of the compiled interior update (:func:`models.moc_kernel.interior_step`).

Straightforward, vectorised per pipe, no numba: the reference the tests compare the kernel
with and the baseline the benchmark measures it against. Same arrays, same equations, same
discrete vapour cavity model.
"""

from __future__ import annotations

import numpy as np

__all__ = ["reference_interior_step", "reference_advance_interior"]


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
            cp = cp - kb * ((qa - Qd_prev[a]) + np.sign(qa) * np.abs(Qu[i] - qa))
            cm = cm + kb * ((qb - Qu_prev[b]) + np.sign(qb) * np.abs(qb - Qd[i]))
        hp = 0.5 * (cp + cm)
        q = (cp - cm) / (2.0 * B)
        qu, qd = q.copy(), q.copy()
        cavity = (vol[i] > 0.0) | (hp < hv[i])
        if np.any(cavity):
            hc = hv[i][cavity]
            cu = (cp[cavity] - hc) / B
            cd = (hc - cm[cavity]) / B
            new_rate = cd - cu
            v_new = vol[i][cavity] + 0.5 * dt * (new_rate + rate[i][cavity])
            keep = v_new > 0.0
            hp[cavity] = np.where(keep, hc, hp[cavity])
            qu[cavity] = np.where(keep, cu, q[cavity])
            qd[cavity] = np.where(keep, cd, q[cavity])
            vi, ri = vol[i], rate[i]
            vi[cavity] = np.where(keep, v_new, 0.0)
            ri[cavity] = np.where(keep, new_rate, 0.0)
            vol[i], rate[i] = vi, ri
        Hn[i], Qun[i], Qdn[i] = hp, qu, qd
        hmax[i] = np.maximum(hmax[i], hp)
        hmin[i] = np.minimum(hmin[i], hp)


def reference_advance_interior(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                               H, Qu, Qd, dt):
    """Twin of :func:`models.moc_kernel.advance_interior`: interior only, ends held."""
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
    return H
