"""``linedrop check-port``: is a firmware port (C sources or a device log) bit-exact with the model?"""
from harness.port import check as port_check
from harness.errors import InputError


def add_parser(sub):
    p = sub.add_parser("check-port", help="check a C port or a firmware log against golden vectors, bit for bit",
                       description="Build the C sources of a port (strict warnings, through cffi) and "
                                   "replay every vector of VECTORS_DIR through them, or check a log "
                                   "captured from the device against the model. Exit 0 bit-exact, "
                                   "1 at the first divergence, 2 on bad input or a failed build.")
    p.add_argument("vectors", nargs="?", metavar="VECTORS_DIR",
                   help="folder written by 'linedrop vectors'")
    p.add_argument("--c-dir", metavar="DIR",
                   help="the port: every *.c in DIR, with linedrop.h in DIR (the c_ref API)")
    p.add_argument("--log", metavar="FILE.csv",
                   help="check a device log instead of building C: header adc_v,adc_i,cmd, plus any other "
                        "vector column to compare (rows are numbered with the header as row 1)")
    p.add_argument("--config", metavar="ALGO.toml",
                   help="params for --log from an [algorithm] table (default: the vector set's)")
    p.set_defaults(func=run)


def run(args):
    if (args.c_dir is None) == (args.log is None):
        raise InputError("give either --c-dir DIR (with VECTORS_DIR) or --log FILE.csv")
    if args.log is not None:
        params = port_check.log_params(args.vectors, args.config)
        result = port_check.check_log(args.log, params)
        what, got_label = f"log {args.log}", "log"
    else:
        if args.vectors is None:
            raise InputError("--c-dir needs VECTORS_DIR, the folder written by 'linedrop vectors'")
        if args.config is not None:
            raise InputError("--config only applies to --log; a port is checked with the vector set's params")
        result = port_check.check_port(args.vectors, args.c_dir)
        what, got_label = f"port {args.c_dir}", "port"
    if result.divergence is None:
        columns = (f"command and {len(port_check.STATE_FIELDS)} state fields" if result.compared is None
                   else f"column{'' if len(result.compared) == 1 else 's'} {','.join(result.compared)}")
        print(f"{what}: bit-exact on {result.samples} samples ({result.files} file"
              f"{'' if result.files == 1 else 's'}; {columns} after every sample)")
        return 0
    print(f"{what}: NOT bit-exact")
    print(port_check.format_divergence(result.divergence, got_label))
    return 1
