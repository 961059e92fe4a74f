"""Check a firmware port against golden vectors bit for bit: its C sources, or a log from the device.

Both checks compare, after every sample, the command ld_step returned and
every state field, with no tolerance, and stop at the first sample where
anything differs.
"""
from dataclasses import dataclass

import numpy as np

from algo.state import STATE_FIELDS, STATUS_NAMES
from harness.errors import InputError
from harness.port.vector_files import find_sets, params_from_note, parse_vector_csv, read_note, read_set
from harness.loop.replay import model_trace

#: Samples shown before a divergence.
CONTEXT = 3
#: Labels of the compared columns (``cmd`` is both the return value and a state field).
LABELS = ["command"] + list(STATE_FIELDS)
U16_MAX = 0xFFFF


@dataclass
class Divergence:
    """First sample of ``file`` where ``got`` differs from ``rows`` (expected, COLUMNS layout)."""
    file: str
    index: int
    rows: np.ndarray
    got: np.ndarray


@dataclass
class Result:
    """Outcome of a check: samples and files compared, and the first divergence if any."""
    samples: int
    files: int
    divergence: object = None


def first_divergence(expected, got):
    """Index of the first row where ``got`` differs from ``expected`` (both (T, K)), or None."""
    bad = (expected != got).any(axis=1)
    return int(np.argmax(bad)) if bad.any() else None


def _check_inputs(path, rows):
    bad = np.flatnonzero((rows[:, :2] < 0).any(axis=1) | (rows[:, :2] > U16_MAX).any(axis=1))
    if bad.size:
        k = int(bad[0])
        raise InputError(f"{path}: line {k + 2}: ADC codes must be in [0, {U16_MAX}], got "
                         f"adc_v={rows[k, 0]} adc_i={rows[k, 1]}")


def check_port(vec_dir, c_dir):
    """Build the port in ``c_dir`` and replay every vector set of ``vec_dir`` through it."""
    from c_ref.port_build import PortError, build_port
    sets = [(note, read_set(note)) for note in find_sets(vec_dir)]
    try:
        port = build_port(c_dir)
    except PortError as exc:
        raise InputError(str(exc)) from None
    samples = files = 0
    for note, (params, vectors) in sets:
        for name, rows in vectors:
            _check_inputs(name, rows)
            got = port.trace(params, rows[:, 0], rows[:, 1], STATE_FIELDS)
            k = first_divergence(rows[:, 2:], got)
            if k is not None:
                return Result(samples + k, files, Divergence(name, k, rows, got))
            samples, files = samples + len(rows), files + 1
    return Result(samples, files)


def log_params(vec_dir=None, config=None):
    """Params for a log check: from an algorithm config, else from the one vector set in ``vec_dir``."""
    if config is not None:
        from algo.params import derive
        from harness.scenario.algo_toml import load_algo_config
        return derive(load_algo_config(config))
    if vec_dir is None:
        raise InputError("--log needs the params: give VECTORS_DIR or --config ALGO.toml")
    notes = find_sets(vec_dir)
    found = {}
    for path in notes:
        p = params_from_note(read_note(path), path)
        found.setdefault(p.fingerprint(), p)
    if len(found) > 1:
        raise InputError(f"{vec_dir}: vector sets with {len(found)} different params; "
                         f"give --config ALGO.toml for the log")
    return found.popitem()[1]


def check_log(log_path, params):
    """Replay a device log's ADC codes through the model and compare its commands and state."""
    try:
        with open(log_path, encoding="utf-8") as f:
            text = f.read()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{log_path}: cannot read log: {getattr(exc, 'strerror', None) or exc}") from None
    rows = parse_vector_csv(log_path, text)
    _check_inputs(log_path, rows)
    want = model_trace(params, rows[:, 0], rows[:, 1])
    k = first_divergence(want, rows[:, 2:])
    if k is not None:
        # For a log the model is the reference and the device what was "got".
        expected = np.column_stack([rows[:, :2], want])
        return Result(k, 0, Divergence(log_path, k, expected, rows[:, 2:]))
    return Result(len(rows), 1)


def format_divergence(d, got_label="got"):
    """Human-readable report: where, the inputs, every compared value, the samples before it."""
    k, exp, got = d.index, d.rows[d.index, 2:], d.got[d.index]
    differ = [LABELS[c] for c in range(len(LABELS)) if exp[c] != got[c]]
    col = {f: 3 + n for n, f in enumerate(STATE_FIELDS)}
    window = int(d.rows[k - 1, col["windows"]]) if k else 0
    pos = int(d.rows[k - 1, col["count"]]) if k else 0
    where = f"sample {pos} of window {window}" + (", the window end" if d.rows[k, col["count"]] == 0 else "")
    lines = [f"first divergence in {d.file} at sample {k} ({where}; {k} samples bit-exact before it)",
             f"  inputs: adc_v={d.rows[k, 0]} adc_i={d.rows[k, 1]}",
             f"  differs: {', '.join(differ)}",
             f"    {'field':<16}{'expected':>14}{got_label:>14}"]
    for c, label in enumerate(LABELS):
        mark = "*" if exp[c] != got[c] else " "
        note = "   <-- differs" if exp[c] != got[c] else ""
        lines.append(f"  {mark} {label:<16}{exp[c]:>14}{got[c]:>14}{note}")
    status = exp[1 + STATE_FIELDS.index("status")]
    lines.append(f"  (expected status after this sample: {STATUS_NAMES.get(int(status), status)})")
    if k:
        lines.append(f"  the {min(k, CONTEXT)} samples before it (bit-exact):")
        lines.append(f"    {'sample':>8}{'adc_v':>8}{'adc_i':>8}{'cmd':>8}{'count':>8}{'status':>8}")
        for j in range(max(0, k - CONTEXT), k):
            r = d.rows[j]
            lines.append(f"    {j:>8}{r[0]:>8}{r[1]:>8}{r[2]:>8}"
                         f"{r[3 + STATE_FIELDS.index('count')]:>8}{r[3 + STATE_FIELDS.index('status')]:>8}")
    return "\n".join(lines)

