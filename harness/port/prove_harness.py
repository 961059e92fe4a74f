"""Write the C analysis harness ``linedrop prove`` hands to Frama-C's value analysis (Eva).

The harness states one inductive step: a state drawn anywhere inside the invariant (the
intervals of algo.ranges.state_bounds, tightened where a field's bound depends on how far the
window or period has run), ADC codes anywhere in uint16, one call of each entry in
:data:`ENTRIES`, then an ACSL assertion of the whole invariant on the state after the call.
Eva proves every assertion and finds no alarm only if no call from inside the invariant has a
runtime error or leaves it; with the init entries establishing it, it holds for every input
sequence.

The window's sums grow with the sample count, so a bound over the whole window is not
inductive on its own: a state with count 0 and a full window's sum would leave it. The
invariant ties them to ``count`` (and the period sum to ``phase``, with ``phase`` the count
modulo the period, as a window ends on a period end), and the harness splits the analysis on
every value of ``count`` so Eva, which keeps intervals per variable, sees each tie exactly.
"""
from algo.fixed import rshift_round
from algo.ranges import state_bounds
from algo.state import STATE_FIELDS
from harness.port.params_header import params_header

#: The analysed entry functions, in the order the harness calls them: (name, what the call's
#: state starts from, the C statement). "invariant" draws the state inside the invariant,
#: "any" starts from any bytes (an init); the ADC codes are ``v`` and ``i`` (any uint16).
#: The one place to change when the firmware's call sequence changes.
ENTRIES = (
    ("ld_init", "any", "ld_init(&ld_params, &s);"),
    ("ld_reset", "invariant", "ld_reset(&ld_params, &s);"),
    ("ld_step", "invariant", "(void)ld_step(&ld_params, &s, v, i);"),
    ("ld_step_isr", "invariant", "(void)ld_step_isr(&ld_params, &s, v, i);"),
    ("ld_window_work", "invariant", "(void)ld_window_work(&ld_params, &s);"),
)

#: The C sources the entries need, relative to c_ref/.
SOURCES = ("step.c", "estimator.c", "fixed.c")

HARNESS_NAME = "ld_prove.c"
PARAMS_NAME = "ld_prove_params.h"

_ACC = ("acc_vi", "acc_vq", "acc_ii", "acc_iq")
_INTERVAL = {"windows": "Frama_C_unsigned_int_interval"}


def _product_ends(p):
    """(lo, hi) of one shifted demodulation product, as algo.ranges bounds it."""
    amp = (1 << (p.tab_bits - 1)) - 1
    return rshift_round(-p.adc_max * amp, p.demod_shift), rshift_round(p.adc_max * amp, p.demod_shift)


def tied_bounds(p):
    """``{field: (lo_expr, hi_expr)}``: C expressions of the bounds that depend on ``count`` or
    ``phase`` (held in the harness's variables ``n`` and ``ph``), the inductive form of
    algo.ranges' window and period bounds (each within it, count < window, phase < period)."""
    lo, hi = _product_ends(p)
    half = p.window >> 1
    out = {name: (f"(int32_t)n * ({lo})", f"(int32_t)n * ({hi})") for name in _ACC}
    for name in ("isum", "vsum"):
        out[name] = ("0", f"(int32_t)n * {p.adc_max}")
    for name in ("isum_h", "vsum_h"):
        out[name] = ("0", f"(n >= {half} ? {half * p.adc_max} : 0)")
    out["psum"] = ("0", f"(int32_t)ph * {p.adc_max}")
    out["phase"] = ("ph", "ph")
    return out


def _c_int(x):
    """A C integer literal for ``x`` that keeps its value in any context (no unsigned surprises)."""
    if x == -(1 << 31):
        return "INT32_MIN"
    return f"{x}" if -(1 << 31) < x < (1 << 31) else f"{x}u"


def _draw(name, lo, hi):
    fn = _INTERVAL.get(name, "Frama_C_interval")
    return f"    s.{name} = {fn}({lo}, {hi});"


def invariant(p):
    """``[(name, lo_expr, hi_expr)]``: the invariant as C bounds, one per assertion: every state
    field's algo.ranges bound, then (``<field>_tied``) the count- or phase-tied ones."""
    bounds, tied = state_bounds(p), tied_bounds(p)
    out = []
    for name in STATE_FIELDS:
        out.append((name, *(_c_int(b) for b in bounds[name])))
        if name in tied:
            out.append((name + "_tied", *tied[name]))
    return out


def assertion_names(p):
    """The harness's assertion labels after each entry's call (without the entry prefix)."""
    return [name for name, _, _ in invariant(p)]


def _invariant_asserts(p, label):
    """ACSL assertions of the invariant after a call, named ``<entry>_<field>`` so an alarm says
    which bound of which call."""
    lines = ["    n = s.count;", f"    ph = (uint16_t)(n & {p.period - 1}u);"]
    for name, lo, hi in invariant(p):
        field = name[:-len("_tied")] if name.endswith("_tied") else name
        lines.append(f"    /*@ assert {label}_{name}: {lo} <= s.{field} <= {hi}; */")
    return lines


def _draw_invariant(p):
    """C statements drawing ``s`` anywhere inside the invariant, split on every count."""
    bounds, tied = state_bounds(p), tied_bounds(p)
    lines = [f"    n = (uint16_t)Frama_C_interval(0, {p.window - 1});",
             "    //@ split n;",
             f"    ph = (uint16_t)(n & {p.period - 1}u);",
             "    s.count = n;"]
    for name in STATE_FIELDS:
        if name == "count":
            continue
        lo, hi = tied.get(name, tuple(_c_int(b) for b in bounds[name]))
        lines.append(_draw(name, lo, hi))
    return lines


def harness_source(p, entries=ENTRIES):
    """C source of the analysis harness for params block ``p`` (algo.params.Params): one
    function ``ld_prove_<entry>`` per entry and ``ld_prove_main`` calling each."""
    out = ["/* Analysis harness for Frama-C Eva, written by linedrop prove; do not edit. */",
           "#include <stdint.h>", '#include "__fc_builtin.h"', '#include "linedrop.h"',
           f'#include "{PARAMS_NAME}"', ""]
    for name, start, call in entries:
        out += [f"static void ld_prove_{name}(void)", "{", "    ld_state_t s;", "    uint16_t n = 0u, ph = 0u;",
                "    uint16_t v = (uint16_t)Frama_C_interval(0, 65535);",
                "    uint16_t i = (uint16_t)Frama_C_interval(0, 65535);"]
        if start == "invariant":
            out += _draw_invariant(p)
        else:
            out += ["    Frama_C_make_unknown((char *)&s, sizeof s);"]
        out += [f"    {call}"] + _invariant_asserts(p, name) + ["}", ""]
    out += ["void ld_prove_main(void)", "{"] + [f"    ld_prove_{name}();" for name, _, _ in entries]
    out += ["}", ""]
    return "\n".join(out)


def params_source(p):
    """The params header the harness includes (harness.port.params_header)."""
    return params_header(p, guard="LINEDROP_PROVE_PARAMS_H",
                         comment="The params block linedrop prove analyses.")
