"""Replay recorded ADC codes through one backend, optionally tracing every state field.

:func:`model_trace` is the one scalar replay of the fixed-point model (golden vectors, port
checks and ``linedrop replay`` all use it).
"""
import numpy as np

from algo import step as scalar
from algo.params import derive
from algo.state import STATE_FIELDS
from harness.loop import backends


def replay(backend, cfg, adc_v, adc_i, with_state=False):
    """Run one instance over the samples.

    Parameters
    ----------
    backend : {"model", "c", "ideal"}
    cfg : algo.config.AlgoConfig
    adc_v, adc_i : numpy.ndarray of uint16, shape (T,)
        ADC codes, one pair per sample.
    with_state : bool
        Also return every state field after every sample.

    Returns
    -------
    (commands, trace) : numpy.ndarray of shape (T,), and a dict of (T,) arrays or None.
    """
    if backend == "model":
        rows = model_trace(derive(cfg), adc_v, adc_i)
        trace = {f: rows[:, 1 + k] for k, f in enumerate(STATE_FIELDS)} if with_state else None
        return rows[:, 0], trace
    algo = backends.make(backend, [cfg])
    if not with_state and backend == "c":
        return algo.run(adc_v[None, :], adc_i[None, :])[0], None
    n = len(adc_v)
    cmds = np.empty(n, dtype=np.float64 if backend == "ideal" else np.int64)
    trace = {f: np.empty(n, dtype=cmds.dtype) for f in STATE_FIELDS} if with_state else None
    for t in range(n):
        cmds[t] = algo.step(adc_v[t:t + 1], adc_i[t:t + 1])[0]
        if with_state:
            for f, value in algo.state(0).items():
                trace[f][t] = value
    return cmds, trace


def model_trace(params, adc_v, adc_i):
    """The model's command and every state field after each sample, from ld_init.

    Returns
    -------
    numpy.ndarray of int64, shape (T, 1 + len(STATE_FIELDS)): ``cmd`` then the state fields.
    """
    s = scalar.init(params)
    rows = []
    for v, i in zip(adc_v.tolist(), adc_i.tolist()):
        cmd = scalar.step(params, s, v, i)
        rows.append([cmd] + [getattr(s, f) for f in STATE_FIELDS])
    return np.array(rows, dtype=np.int64).reshape(len(rows), 1 + len(STATE_FIELDS))
