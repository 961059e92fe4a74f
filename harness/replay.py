"""Replay recorded ADC codes through one backend, optionally tracing every state field."""
import numpy as np

from algo import step as scalar
from algo.params import derive
from algo.state import STATE_FIELDS
from harness import backends


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
        return _replay_scalar(cfg, adc_v, adc_i, with_state)
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


def _replay_scalar(cfg, adc_v, adc_i, with_state):
    p = derive(cfg)
    s = scalar.init(p)
    n = len(adc_v)
    cmds = np.empty(n, dtype=np.int64)
    trace = {f: np.empty(n, dtype=np.int64) for f in STATE_FIELDS} if with_state else None
    for t, (v, i) in enumerate(zip(adc_v.tolist(), adc_i.tolist())):
        cmds[t] = scalar.step(p, s, v, i)
        if with_state:
            for f in STATE_FIELDS:
                trace[f][t] = getattr(s, f)
    return cmds, trace
