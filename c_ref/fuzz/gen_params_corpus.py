"""Write c_ref/fuzz/params_corpus.h: valid ld_params_t blocks for the fuzz target, from a seeded grid.

Every block comes from ``algo.params.derive`` (which rejects settings that
could overflow), so the fuzzer only ever explores ADC sequences under params
a user could legally ship. Re-run after changing algo/params.py:

    python -m c_ref.fuzz.gen_params_corpus          # rewrite the header
    python -m c_ref.fuzz.gen_params_corpus --check  # exit 1 if it is stale
"""
import argparse
import os
import random
import sys

from algo.config import AlgoConfig, ConfigError
from algo.params import PARAM_FIELDS, derive

SEED = 5150
N_BLOCKS = 32
OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "params_corpus.h")

# Word lengths and ranges at and between their limits; each block draws one value per key.
GRID = {
    "adc_bits": [8, 10, 12, 14, 16],
    "table_bits": [8, 12, 16],
    "acc_bits": [20, 24, 28, 32],
    "period_samples": [4, 8, 32, 128, 256],
    "periods_per_window": [1, 2, 8, 64],
    "r_frac_bits": [8, 12, 16],
    "corr_frac_bits": [0, 4, 8],
    "dac_bits": [8, 12, 16],
    "esr_allowance_ohm": [0.0, 0.3, 2.0],
    "r_max_ohm": [0.5, 10.0, 100.0],
    "x_max_ohm": [0.5, 10.0, 100.0],
    "r_filter_shift": [0, 2, 8],
    "step_rel_shift": [0, 1, 8],
    "fault_windows": [1, 6, 1000],
    "compensation": [0.0, 0.98, 1.0],
    "pert_fraction": [0.01, 0.1, 0.5],
    "swing_min_a": [0.0, 0.01, 1.0],
    "i_full_scale_a": [0.1, 5.0, 100.0],
    "loop_tau_ms": [0.0, 0.125, 4.0, 10000.0],
    "capacitance_f": [0.0, 1e-3, 10.0],
    "kp_max": [0.0, 32.0, 256.0],
    "adc_phase_samples": [-2.0, 0.0, 0.7],
}
# The shipped defaults and the widest and narrowest word lengths always appear (the widest with
# the shortest loop_tau_ms its 256-sample period allows, one period: the largest ki_q).
FIXED = [
    {},
    {"adc_bits": 16, "table_bits": 16, "acc_bits": 32, "period_samples": 256,
     "periods_per_window": 64, "r_frac_bits": 16, "corr_frac_bits": 8, "dac_bits": 16,
     "loop_tau_ms": 8.0},
    {"adc_bits": 8, "table_bits": 8, "acc_bits": 20, "period_samples": 4,
     "periods_per_window": 1, "r_frac_bits": 8, "corr_frac_bits": 0, "dac_bits": 8},
]


def configs(seed=SEED, n=N_BLOCKS):
    """``n`` accepted ``(settings dict, Params)`` pairs: the fixed ones, then seeded draws."""
    rng = random.Random(seed)
    out = [(kw, derive(AlgoConfig(**kw))) for kw in FIXED]
    while len(out) < n:
        kw = {key: rng.choice(values) for key, values in GRID.items()}
        try:
            out.append((kw, derive(AlgoConfig(**kw))))
        except ConfigError:
            continue
    return out


def _c_block(kw, p):
    head = ", ".join(f".{f} = {getattr(p, f)}" for f in PARAM_FIELDS if f != "ref_tab")
    period = 1 << p.period_log2
    tab = ", ".join(str(x) for x in p.ref_tab[:period])
    note = ", ".join(f"{k}={v}" for k, v in kw.items()) or "defaults"
    return (f"    /* {p.fingerprint()}: {note} */\n"
            f"    {{{head},\n     .ref_tab = {{{tab}}}}},\n")


def render(seed=SEED, n=N_BLOCKS, blocks=None):
    """The header text; ``blocks`` (a list of ``(settings, Params)``) overrides the seeded draw."""
    blocks = configs(seed, n) if blocks is None else blocks
    n = len(blocks)
    blocks = "".join(_c_block(kw, p) for kw, p in blocks)
    return ("/*\n"
            " * Valid parameter blocks for c_ref/fuzz/fuzz_step.c. GENERATED, do not edit:\n"
            f" * python -m c_ref.fuzz.gen_params_corpus (seed {seed}, {n} blocks: the defaults,\n"
            " * the widest and the narrowest word lengths, then seeded draws from GRID that\n"
            " * algo.params.derive accepts). Each comment gives the params fingerprint and\n"
            " * the settings drawn (the rest are AlgoConfig's defaults).\n"
            " */\n"
            "#ifndef LINEDROP_FUZZ_PARAMS_CORPUS_H\n"
            "#define LINEDROP_FUZZ_PARAMS_CORPUS_H\n\n"
            '#include "linedrop.h"\n\n'
            f"#define LD_FUZZ_N_PARAMS {n}\n\n"
            "static const ld_params_t ld_fuzz_params[LD_FUZZ_N_PARAMS] = {\n"
            f"{blocks}}};\n\n"
            "#endif /* LINEDROP_FUZZ_PARAMS_CORPUS_H */\n")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true", help="exit 1 if the header is stale")
    args = ap.parse_args(argv)
    text = render()
    if args.check:
        with open(OUT) as f:
            stale = f.read() != text
        if stale:
            print(f"{OUT} is stale; run python -m c_ref.fuzz.gen_params_corpus", file=sys.stderr)
        return int(stale)
    with open(OUT, "w") as f:
        f.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
