"""emcee's moves as rvkep uses them: the mixtures on offer (:data:`MOVES`) and the
differential-evolution snooker move with its proposals drawn for all walkers at once.

References
----------
.. [1] ter Braak, C. J. F. & Vrugt, J. A. (2008), Stat. Comput. 18, 435.
.. [2] Foreman-Mackey, D. et al. (2013), PASP 125, 306 (emcee).
"""

from __future__ import annotations

import numpy as np

__all__ = ["MOVES", "snooker_proposal", "moves"]


def snooker_proposal(s, z, z1, z2, gamma: float):
    """The differential-evolution snooker update of walkers ``s`` (n, ndim) from the
    chosen walkers ``z`` (the snooker's centre) and ``z1``, ``z2`` (the difference),
    with emcee's arithmetic (``emcee.moves.DESnookerMove``; ter Braak & Vrugt 2008):
    u = (s - z) / sqrt|s - z|, q = s + gamma u (u.z1 - u.z2), and the log Metropolis
    factor (ndim - 1)/2 ln(|q - z| / |s - z|).

    Parameters
    ----------
    s, z, z1, z2 : ndarray, shape (n, ndim)
        The walkers, the centres and the two walkers of the difference.
    gamma : float
        The step scale.

    Returns
    -------
    q : ndarray, shape (n, ndim)
        The proposals.
    factors : ndarray, shape (n,)
        The log Metropolis factors.
    """
    delta = s - z
    norm = np.sqrt(np.einsum("ij,ij->i", delta, delta))
    u = delta / np.sqrt(norm)[:, None]
    q = s + u * (gamma * (np.einsum("ij,ij->i", u, z1) - np.einsum("ij,ij->i", u, z2)))[:, None]
    d = q - z
    ratio = np.log(np.sqrt(np.einsum("ij,ij->i", d, d))) - np.log(norm)
    return q, 0.5 * (s.shape[1] - 1.0) * ratio


_SNOOKER_CLASS = None


def _snooker():
    """emcee's snooker move with its proposals drawn for all walkers at once: for each
    walker one walker from each of the three other quarters of the ensemble, their
    roles (centre, first, second) in a uniformly random order, as emcee draws them one
    walker at a time; the same proposal distribution, about 8x fewer Python steps."""
    global _SNOOKER_CLASS
    if _SNOOKER_CLASS is None:
        from emcee.moves import DESnookerMove

        class _Snooker(DESnookerMove):
            def get_proposal(self, s, c, random):
                n = len(s)
                picks = np.stack([cj[random.randint(len(cj), size=n)] for cj in c])
                order = np.argsort(random.rand(n, 3), axis=1)  # a uniform permutation each
                z = picks[order.T, np.arange(n)]  # z[r, i] = picks[order[i, r], i]
                return snooker_proposal(s, z[0], z[1], z[2], self.gammas)

        _SNOOKER_CLASS = _Snooker
    return _SNOOKER_CLASS()


def moves(kind: str):
    """emcee's move (or weighted mixture of moves) named ``kind``.

    Parameters
    ----------
    kind : str
        One of :data:`MOVES`.

    Returns
    -------
    emcee.moves.Move or list of (Move, float)
        What :class:`emcee.EnsembleSampler` takes as ``moves``.
    """
    import emcee

    if kind == "stretch":
        return emcee.moves.StretchMove()
    if kind == "de":
        return [(emcee.moves.DEMove(), 0.8), (_snooker(), 0.2)]
    if kind == "de+stretch":
        return [(emcee.moves.DEMove(), 0.8), (emcee.moves.StretchMove(), 0.2)]
    raise ValueError(f"unknown moves {kind!r}; choose from {', '.join(MOVES)}")


#: Move mixtures on offer. "de" (differential evolution 80% + its snooker variant 20%)
#: is the default: on the demo star it gives about 3x the effective samples per second
#: of the stretch move (scripts/bench_sampling.py).
MOVES = ("de", "de+stretch", "stretch")
