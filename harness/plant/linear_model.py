"""State-space model of supply, cable and load end, and its exact zero-order-hold discretisation.

States ``x = [v_int, i_cable, v_cap]``: the supply's internal (inner-loop) output voltage in V,
the cable current in A and the load-end capacitor voltage in V. Inputs, held constant over a
sample (zero-order hold), ``u = [v_cmd, i_src, i_lim]``: the voltage command in V, the
current-source part of the load in A and the supply current limit in A. Outputs
``y = [v_supply, i_supply, v_load]`` in V, A, V at the supply terminals and the load end.

Elements that are absent (ideal supply with bandwidth 0, cable inductance 0) make the
corresponding state a dummy: its row and column are zero and the quantity it would carry is
computed algebraically in the output equation instead. The load end holds the capacitor C in
series with its ESR, in parallel with a shunt conductance G (leakage plus the folded-in
conductance of the load) and the load's current source.
"""

import numpy as np

#: Pade(13) numerator coefficients and the 1-norm bound up to which it meets double precision
#: (Higham, "The scaling and squaring method for the matrix exponential revisited", SIAM J.
#: Matrix Anal. Appl. 26(4), 2005, Table 2.3 and Algorithm 2.3).
_PADE13 = (64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
           129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
           40840800.0, 960960.0, 16380.0, 182.0, 1.0)
_THETA13 = 5.371920351148152

N_STATE = 3
N_INPUT = 3


def continuous_model(r, l, c, esr, g, omega, is_open=False, current_mode=False):
    """Continuous-time matrices of one scenario.

    Parameters
    ----------
    r : float
        Cable loop resistance, ohm (> 0).
    l : float
        Cable loop inductance, H (0 allowed).
    c : float
        Load-end capacitance, F (> 0).
    esr : float
        Capacitor ESR, ohm (>= 0).
    g : float
        Shunt conductance at the load end (leakage + folded load), S; may be negative.
    omega : float
        Inner voltage-loop bandwidth, rad/s; 0 for an ideal voltage source.
    is_open : bool
        Cable open: no cable current, the load end discharges through the load.
    current_mode : bool
        Supply in current limit: the cable current equals the input ``i_lim``.

    Returns
    -------
    a, b, c_out, d : ndarray
        dx/dt = a x + b u, y = c_out x + d u; shapes (3, 3), (3, 3), (3, 3), (3, 3).
    """
    e = np.eye(N_STATE + N_INPUT)
    zero = np.zeros(N_STATE + N_INPUT)
    v_int = e[0] if omega > 0 else e[3]

    def load_end(i):
        return (esr * (i - e[4]) + e[2]) / (1.0 + esr * g)

    dx1 = zero
    if is_open:
        i = zero
        v_load = load_end(i)
        v_sup = v_int
    elif current_mode:
        i = e[5]
        v_load = load_end(i)
        v_sup = r * i + v_load
    elif l > 0:
        i = e[1]
        v_load = load_end(i)
        v_sup = v_int
        dx1 = (v_int - r * i - v_load) / l
    else:
        v_load = (esr * v_int / r - esr * e[4] + e[2]) / (1.0 + esr * g + esr / r)
        i = (v_int - v_load) / r
        v_sup = v_int
    dx0 = omega * (e[3] - e[0]) if omega > 0 else zero
    dx2 = (i - e[4] - g * v_load) / c
    m = np.stack([dx0, dx1, dx2])
    y = np.stack([v_sup, i, v_load])
    return m[:, :N_STATE], m[:, N_STATE:], y[:, :N_STATE], y[:, N_STATE:]


def continuous_models(r, l, c, esr, g, omega, is_open, current_mode):
    """:func:`continuous_model` of k scenarios at once, each from its own parameters.

    Every branch is evaluated for all scenarios with the scalar function's own operations and
    the one that applies is selected, so each matrix equals the scalar function's to the bit.
    Arguments are arrays of shape (k,) (``current_mode`` may be a bool); returns a, b, c_out, d
    of shape (k, 3, 3) each.
    """
    r, l, c, esr, g, omega = (np.asarray(a, dtype=float)[:, None] for a in (r, l, c, esr, g, omega))
    k = r.shape[0]
    e = [np.broadcast_to(row, (k, N_STATE + N_INPUT)) for row in np.eye(N_STATE + N_INPUT)]
    zero = np.zeros((k, N_STATE + N_INPUT))
    v_int = np.where(omega > 0, e[0], e[3])
    is_open = np.broadcast_to(np.asarray(is_open, dtype=bool), (k,))[:, None]
    current_mode = np.broadcast_to(np.asarray(current_mode, dtype=bool), (k,))[:, None]

    def load_end(i):
        return (esr * (i - e[4]) + e[2]) / (1.0 + esr * g)

    with np.errstate(divide="ignore", invalid="ignore"):
        v_open, v_cur, v_ind = load_end(zero), load_end(e[5]), load_end(e[1])
        v_res = (esr * v_int / r - esr * e[4] + e[2]) / (1.0 + esr * g + esr / r)
        dx1_ind = (v_int - r * e[1] - v_ind) / l
        i_res = (v_int - v_res) / r
    inductive = l > 0

    def pick(open_, cur, ind, res):
        return np.where(is_open, open_, np.where(current_mode, cur, np.where(inductive, ind, res)))

    i = pick(zero, e[5], e[1], i_res)
    v_load = pick(v_open, v_cur, v_ind, v_res)
    v_sup = pick(v_int, r * e[5] + v_cur, v_int, v_int)
    dx1 = pick(zero, zero, dx1_ind, zero)
    dx0 = np.where(omega > 0, omega * (e[3] - e[0]), zero)
    dx2 = (i - e[4] - g * v_load) / c
    m = np.stack([dx0, dx1, dx2], axis=1)
    y = np.stack([v_sup, i, v_load], axis=1)
    return m[:, :, :N_STATE], m[:, :, N_STATE:], y[:, :, :N_STATE], y[:, :, N_STATE:]


def expm_batch(m):
    """Matrix exponential of a stack of small matrices, Pade(13) with scaling and squaring.

    Same algorithm as scipy.linalg.expm (Higham 2005) written with numpy only: on small
    matrices scipy's own LAPACK calls can stall for milliseconds in thread start-up when the
    machine is busy, which a per-sample refresh cannot afford. tests/test_plant.py checks it
    against scipy.linalg.expm.

    Parameters
    ----------
    m : ndarray, shape (k, n, n)

    Returns
    -------
    ndarray, shape (k, n, n)
    """
    m = np.asarray(m, dtype=float)
    norm = np.abs(m).sum(axis=1).max(axis=1)
    s = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _THETA13))).astype(int)
    a = m / (2.0 ** s)[:, None, None]
    b = _PADE13
    eye = np.broadcast_to(np.eye(m.shape[1]), m.shape)
    a2 = a @ a
    a4 = a2 @ a2
    a6 = a4 @ a2
    u = a @ (a6 @ (b[13] * a6 + b[11] * a4 + b[9] * a2) + b[7] * a6 + b[5] * a4 + b[3] * a2 + b[1] * eye)
    v = a6 @ (b[12] * a6 + b[10] * a4 + b[8] * a2) + b[6] * a6 + b[4] * a4 + b[2] * a2 + b[0] * eye
    e = np.linalg.solve(v - u, v + u)
    for j in range(int(s.max(initial=0))):
        sel = s > j
        e[sel] = e[sel] @ e[sel]
    return e


def discretise(a, b, dt_s):
    """Exact zero-order-hold discretisation of a batch of systems.

    Parameters
    ----------
    a : ndarray, shape (k, n, n)
        Continuous state matrices, 1/s.
    b : ndarray, shape (k, n, m)
        Continuous input matrices.
    dt_s : float
        Sample period, s.

    Returns
    -------
    phi, gamma : ndarray, shapes (k, n, n) and (k, n, m)
        x[k+1] = phi x[k] + gamma u[k], from the matrix exponential of the augmented matrix
        [[a, b], [0, 0]] * dt.
    """
    k, n, _ = a.shape
    m = b.shape[2]
    aug = np.zeros((k, n + m, n + m))
    aug[:, :n, :n] = a * dt_s
    aug[:, :n, n:] = b * dt_s
    e = expm_batch(aug)
    return e[:, :n, :n], e[:, :n, n:]


#: Rows of a step's output, in the order :meth:`DiscreteSystems.advance` returns them: the next
#: state comes first with the cable current taken from the output (a dummy state otherwise),
#: then the outputs at the end of the sample.
OUT_ROWS = (0, 4, 2, 3, 5)  # of [x_next (3), y (3)]: v_int, i_supply, v_cap, v_supply, v_load


class DiscreteSystems:
    """Voltage-mode and current-limit-mode discrete systems of B scenarios, refreshed by subset.

    One step is one matrix product per scenario, ``out = w @ [x, v_cmd, i_src(, i_lim)]``
    with ``out = [v_int', i_supply, v_cap', v_supply, v_load]`` at the end of the sample
    (:data:`OUT_ROWS`), built from the exact discretisation as
    ``[[phi, gamma], [c_out phi, c_out gamma + d]]``. ``w[0]`` (voltage mode) has shape
    (5, 5, B) and leaves out the current-limit input, which that mode does not use; ``w[1]``
    (current-limit mode) has shape (6, 5, B). Both are stored input-major, scenario last.
    """

    def __init__(self, n_batch, dt_s):
        self.dt_s = dt_s
        self.w = (np.zeros((N_STATE + 2, 5, n_batch)), np.zeros((N_STATE + N_INPUT, 5, n_batch)))

    def refresh(self, idx, r, l, c, esr, g, omega, is_open):
        """Recompute the systems of scenarios ``idx`` from per-scenario parameter arrays (B,)."""
        idx = np.asarray(idx)
        if idx.size == 0:
            return
        # Scenarios with identical parameters (a batch of copies) share one discretisation.
        params = np.stack([r[idx], l[idx], c[idx], esr[idx], g[idx], omega[idx], is_open[idx]], axis=1)
        # A full sort to find duplicates costs more than the exponentials it saves, so only the
        # cheap case is shared: every row equal to the first.
        if (params == params[0]).all():
            params, inverse = params[:1], np.zeros(len(idx), dtype=np.int64)
        else:
            inverse = np.arange(len(idx))
        both = np.concatenate([params, params])  # voltage mode, then current-limit mode
        current_mode = np.repeat([False, True], len(params))
        a, b, c_out, d = continuous_models(*both[:, :6].T, both[:, 6] != 0, current_mode)
        phi, gamma = discretise(a, b, self.dt_s)
        full = np.concatenate([np.concatenate([phi, gamma], axis=2),
                               np.concatenate([c_out @ phi, c_out @ gamma + d], axis=2)], axis=1)
        for mode, rows in enumerate((slice(0, len(params)), slice(len(params), None))):
            w = full[rows][:, OUT_ROWS, :self.w[mode].shape[0]]
            self.w[mode][:, :, idx] = w[inverse.ravel()].transpose(2, 1, 0)

    def advance(self, mode, z, idx=None):
        """One step in ``mode`` (0 or 1): ``z`` is [x, v_cmd, i_src(, i_lim)] of shape (5 or 6, m)
        for scenarios ``idx`` (all by default); returns the (5, m) output rows of :data:`OUT_ROWS`."""
        w = self.w[mode] if idx is None else self.w[mode][:, :, idx]
        return np.einsum("jib,jb->ib", w, z)
