"""cffi build script (API, out-of-line mode) for the host-only compiled closed loop; run by setup.py."""
import os
import sys

from cffi import FFI

HERE = os.path.dirname(os.path.abspath(__file__))
C_REF = os.path.dirname(HERE)
sys.path.insert(0, C_REF)
from build_ffi import cdef_text  # noqa: E402  (c_ref/build_ffi.py, beside this folder)

del sys.path[0]
#: The algorithm's sources (batch.c: its header declares ld_step_batch), compiled into this module too,
#: the plant loop and its discretisation.
SOURCES = [os.path.join(C_REF, "step.c"), os.path.join(C_REF, "estimator.c"), os.path.join(C_REF, "fixed.c"),
           os.path.join(C_REF, "batch.c"),
           os.path.join(HERE, "plant_loop.c"), os.path.join(HERE, "plant_systems.c")]


ffibuilder = FFI()
ffibuilder.cdef(cdef_text() + "\n" + cdef_text(os.path.join(HERE, "plant_loop.h"), "LDP_") + "\n"
                + cdef_text(os.path.join(HERE, "plant_systems.h"), "LDP_"))
ffibuilder.set_source(
    "c_ref.host._plant_loop_cffi",
    '#include "plant_loop.h"\n#include "plant_systems.h"',
    sources=[os.path.relpath(s) for s in SOURCES],
    include_dirs=[os.path.relpath(C_REF), os.path.relpath(HERE)],
    # No fused multiply-adds: the plant follows numpy's rounding operation for operation.
    extra_compile_args=["-std=c99", "-O2", "-ffp-contract=off"],
    libraries=["m"],
)

if __name__ == "__main__":
    ffibuilder.compile(verbose=False)
