"""Text vector files for c_ref/tools/replay_main.c: write parameters and operations, read results.

Format ``LDTV 1`` (one record per line; ``#`` comments and blank lines ignored)::

    LDTV 1
    p <the 33 scalar ld_params_t fields, in declaration order>
    t <ref_tab entries, 16 per line, 256 in all>
    s <adc_v> <adc_i>        one ld_step
    q <adc_v> <adc_i>        one ld_step_isr (the interrupt path)
    w                        ld_window_work (the main loop's window work)
    r                        ld_reset
    i                        ld_init

A new ``p`` line starts a new case; ld_init runs before its first operation.
The driver prints one line per operation: the command (for ``w``, what ld_window_work returned:
1 when it finished a window, else 0), then every ``ld_state_t`` field in declaration order
(``OUTPUT_FIELDS``).
"""
from algo import step as model
from algo.estimator import window_work
from algo.params import PARAM_FIELDS, TAB_MAX, Params
from algo.state import STATE_FIELDS

HEADER = "LDTV 1"
SCALAR_PARAMS = PARAM_FIELDS[:-1]
TAB_PER_LINE = 16
OUTPUT_FIELDS = ["command"] + STATE_FIELDS

if PARAM_FIELDS[-1] != "ref_tab" or len(SCALAR_PARAMS) != 33:
    raise ImportError("ld_params_t layout changed: update c_ref/tools/replay_main.c and textvec")


def samples(adc_v, adc_i):
    """Operations stepping one ADC pair each (codes 0..65535)."""
    return [("s", int(v), int(i)) for v, i in zip(adc_v, adc_i)]


def params_lines(p):
    """The ``p`` and ``t`` lines of a :class:`algo.params.Params`."""
    lines = ["p " + " ".join(str(int(getattr(p, name))) for name in SCALAR_PARAMS)]
    tab = list(p.ref_tab)
    if len(tab) != TAB_MAX:
        raise ValueError(f"ref_tab has {len(tab)} entries, expected {TAB_MAX}")
    for k in range(0, TAB_MAX, TAB_PER_LINE):
        lines.append("t " + " ".join(str(x) for x in tab[k:k + TAB_PER_LINE]))
    return lines


def isr_samples(adc_v, adc_i, work_after=()):
    """Operations stepping one ADC pair each through the interrupt path, with the window work
    (``w``) after each sample index in ``work_after``."""
    after = set(work_after)
    ops = []
    for t, (v, i) in enumerate(zip(adc_v, adc_i)):
        ops.append(("q", int(v), int(i)))
        if t in after:
            ops.append(("w",))
    return ops


def _op_line(op):
    if op[0] in ("s", "q"):
        return f"{op[0]} {op[1]} {op[2]}"
    if op[0] in ("r", "i", "w") and len(op) == 1:
        return op[0]
    raise ValueError(f"unknown operation {op!r}")


def dumps(cases, comment=None):
    """Text of a vector file for ``cases``: an iterable of ``(Params, operations)``."""
    lines = [f"# {c}" for c in (comment or "").splitlines()] + [HEADER]
    for p, ops in cases:
        lines += params_lines(p)
        lines += [_op_line(op) for op in ops]
    return "\n".join(lines) + "\n"


def loads(text):
    """Inverse of :func:`dumps`: a list of ``(Params, operations)``."""
    cases, lines = [], [ln.split() for ln in text.splitlines() if ln.strip() and ln[0] != "#"]
    if not lines or " ".join(lines[0]) != HEADER:
        raise ValueError(f"not a text vector file: first record must be {HEADER!r}")
    scalars, tab, ops = None, [], None
    for words in lines[1:] + [["p"]]:
        kind, vals = words[0], [int(w) for w in words[1:]]
        if kind == "p":
            if scalars is not None:
                cases.append((Params(**dict(zip(SCALAR_PARAMS, scalars)), ref_tab=tuple(tab)), ops))
            scalars, tab, ops = vals, [], []
        elif kind == "t":
            tab += vals
        elif kind in ("s", "q"):
            ops.append((kind, vals[0], vals[1]))
        elif kind in ("r", "i", "w"):
            ops.append((kind,))
        else:
            raise ValueError(f"unknown record {kind!r}")
    return cases


def parse_output(text):
    """The driver's output as a list of ``(command, state dict)``."""
    rows = []
    for n, line in enumerate(text.splitlines(), 1):
        vals = [int(w) for w in line.split()]
        if len(vals) != len(OUTPUT_FIELDS):
            raise ValueError(f"output line {n}: {len(vals)} values, expected {len(OUTPUT_FIELDS)}")
        rows.append((vals[0], dict(zip(OUTPUT_FIELDS[1:], vals[1:]))))
    return rows


def model_output(cases):
    """What a bit-exact driver must print for ``cases``, computed by the Python model."""
    rows = []
    for p, ops in cases:
        s = None
        for op in ops:
            if s is None or op[0] == "i":
                s = model.init(p)
            if op[0] == "s":
                cmd = model.step(p, s, op[1], op[2])
            elif op[0] == "q":
                cmd = model.step_isr(p, s, op[1], op[2])
            elif op[0] == "w":
                cmd = window_work(p, s)      # the driver prints what it returned
            else:
                if op[0] == "r":
                    model.reset(p, s)
                cmd = s.cmd
            state = {name: getattr(s, name) for name in STATE_FIELDS}
            rows.append((cmd, state))
    return rows


def format_output(rows):
    """Rows of ``(command, state dict)`` as the driver prints them."""
    return "".join(" ".join(str(v) for v in [cmd] + [st[f] for f in OUTPUT_FIELDS[1:]]) + "\n"
                   for cmd, st in rows)
