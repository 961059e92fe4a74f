"""cffi build script (API, out-of-line mode) for the C reference; run by setup.py."""
import os
import re

from cffi import FFI

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCES = ["step.c", "estimator.c", "fixed.c", "batch.c"]


def cdef_text(header=os.path.join(HERE, "linedrop.h"), prefix="LD_"):
    """A linedrop.h (c_ref's own by default) reduced to what cffi's cdef accepts.

    Keeps integer ``#define <prefix>*`` lines (decimal, optionally with a ``u`` suffix), types and prototypes.
    """
    with open(header) as f:
        text = f.read()
    keep = []
    for line in text.splitlines():
        if line.startswith("#"):
            if re.match(rf"#define {prefix}\w+ \d+u?\s*(/\*.*)?$", line):
                keep.append(line.split("/*")[0])
            continue
        keep.append(line)
    return "\n".join(keep)


def _rel(name):
    return os.path.relpath(os.path.join(HERE, name))


ffibuilder = FFI()
ffibuilder.cdef(cdef_text())
ffibuilder.set_source(
    "c_ref._linedrop_cffi",
    '#include "linedrop.h"',
    sources=[_rel(s) for s in SOURCES],
    include_dirs=[_rel(".")],
    extra_compile_args=["-std=c99", "-O2"],
)

if __name__ == "__main__":
    ffibuilder.compile(verbose=False)
