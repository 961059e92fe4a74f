"""Run the Python model and the C reference side by side and demand identical bits.

Every comparison is exact: the command and every ``ld_state_t`` field, after
every operation. A mismatch raises ``AssertionError`` naming the sample, the
inputs and each differing field with both values.
"""
import numpy as np

from algo import step as model
from algo.estimator import window_work
from algo.state import STATE_FIELDS
from c_ref.binding import CBatch


def py_state(s):
    """Every state field of a model :class:`algo.state.State` as a dict of ints."""
    return {name: getattr(s, name) for name in STATE_FIELDS}


def diff_states(py, c):
    """``{field: (python, c)}`` for every field that differs."""
    return {k: (py[k], c[k]) for k in STATE_FIELDS if py[k] != c[k]}


def assert_same(what, py_cmd, c_cmd, py, c):
    """Fail with a field-by-field report unless command and state agree exactly."""
    diff = diff_states(py, c)
    if py_cmd != c_cmd:
        diff["<command>"] = (py_cmd, c_cmd)
    assert not diff, f"Python model and C differ {what}: " + ", ".join(
        f"{k}: python={a} c={b}" for k, (a, b) in diff.items())


class Pair:
    """One model instance and one single-instance :class:`CBatch`, driven in lock step."""

    def __init__(self, p):
        self.p = p
        self.s = model.init(p)
        self.c = CBatch([p])
        self.ops = 0
        self.check("after init")

    def check(self, what):
        assert_same(what, self.s.cmd, self.c.state(0)["cmd"], py_state(self.s), self.c.state(0))

    def init(self):
        self.s = model.init(self.p)
        self.c.init(0)
        self.check(f"after init (operation {self.ops})")
        self.ops += 1

    def reset(self):
        model.reset(self.p, self.s)
        self.c.reset(0)
        self.check(f"after reset (operation {self.ops})")
        self.ops += 1

    def step(self, adc_v, adc_i):
        """One sample on both; compare the returned commands and every state field."""
        py_cmd = model.step(self.p, self.s, adc_v, adc_i)
        c_cmd = int(self.c.run(np.array([adc_v], np.uint16), np.array([adc_i], np.uint16))[0])
        assert_same(f"after step {self.ops} (adc_v={adc_v}, adc_i={adc_i})",
                    py_cmd, c_cmd, py_state(self.s), self.c.state(0))
        self.ops += 1
        return py_cmd

    def step_isr(self, adc_v, adc_i):
        """One sample through the interrupt path on both; compare as ``step``."""
        py_cmd = model.step_isr(self.p, self.s, adc_v, adc_i)
        c_cmd = self.c.step_isr(0, adc_v, adc_i)
        assert_same(f"after step_isr {self.ops} (adc_v={adc_v}, adc_i={adc_i})",
                    py_cmd, c_cmd, py_state(self.s), self.c.state(0))
        self.ops += 1
        return py_cmd

    def window_work(self):
        """The window work on both; compare what it returns and every state field."""
        py_did = window_work(self.p, self.s)
        c_did = self.c.window_work(0)
        assert_same(f"after window_work (operation {self.ops})", py_did, c_did,
                    py_state(self.s), self.c.state(0))
        self.ops += 1
        return py_did

    def run(self, adc_v, adc_i):
        """Step both through a sequence, comparing after every sample."""
        for a, b in zip(adc_v, adc_i):
            self.step(a, b)


def model_run(p, adc_v, adc_i, s=None):
    """Model commands for a whole sequence, and the final state."""
    s = model.init(p) if s is None else s
    cmds = [model.step(p, s, a, b) for a, b in zip(adc_v, adc_i)]
    return cmds, s


def first_difference(py_cmds, c_cmds, adc_v, adc_i):
    """Message for the first sample whose commands differ, or ``None``."""
    bad = np.flatnonzero(np.asarray(py_cmds) != np.asarray(c_cmds))
    if bad.size == 0:
        return None
    t = int(bad[0])
    return (f"command differs first at sample {t} (adc_v={adc_v[t]}, adc_i={adc_i[t]}): "
            f"python={py_cmds[t]} c={int(c_cmds[t])}")
