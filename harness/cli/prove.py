"""``linedrop prove``: prove with Frama-C's value analysis that the C step cannot fail for a params block."""
from harness.port import prove as pv


def add_parser(sub):
    p = sub.add_parser("prove", help="prove the C step free of runtime errors for any ADC input (Frama-C Eva)",
                       description="For each params block, analyse the C reference with Frama-C's value "
                                   "analysis: from any state inside the range analysis's bounds and any "
                                   "pair of uint16 ADC codes, one call of each entry function (init, reset, "
                                   "step, with every period end and window end) has no runtime error and "
                                   "leaves the state inside the bounds. Prints 'proved' or every alarm "
                                   "with file:line. Exit 0 proved, 1 alarms, 2 bad input or no frama-c.")
    p.add_argument("scenarios", nargs="*", metavar="SCENARIO.toml",
                   help="scenario files whose params (as 'linedrop simulate' runs them) to prove "
                        "(default: the default algorithm config)")
    p.add_argument("--c-dir", metavar="DIR", default=pv.C_REF,
                   help="folder of the C sources to analyse (step.c, estimator.c, fixed.c, linedrop.h; "
                        "default: the C reference)")
    p.add_argument("--machdep", choices=pv.MACHDEPS, default=pv.MACHDEPS[0],
                   help="data model: x86_32 for a 32-bit microcontroller (int and long 32 bits, the "
                        "default), x86_64 for a 64-bit host")
    p.set_defaults(func=run)


def run(args):
    blocks = ([(path, pv.scenario_params(path)) for path in args.scenarios]
              or [("default config", pv.scenario_params(None))])
    pv.frama_c()
    status = 0
    for name, params in blocks:
        proof = pv.prove(params, args.c_dir, args.machdep)
        if proof.alarms:
            status = 1
            print(f"{name}: {len(proof.alarms)} alarm{'s' if len(proof.alarms) > 1 else ''} "
                  f"({proof.seconds:.1f} s)")
            for alarm in proof.alarms:
                print(f"{alarm.where}: {alarm.kind} ({alarm.status}): {alarm.expression}")
        else:
            print(f"{name}: proved ({proof.harness_asserts} assertions, {proof.seconds:.1f} s)")
    return status
