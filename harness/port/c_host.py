"""Host builds of the firmware sources with the text-vector replay driver: build, replay a vector set.

Shared by the branch-coverage measure (c_coverage) and the mutation runner (c_mutants). The
firmware sources are c_ref/cortexm/build.py's ALGO_SOURCES, read at call time, so a source
added there is built here too; the driver is c_ref/tools/replay_main.c (format: c_ref/textvec.py).
"""
import os
import shutil
import subprocess

from c_ref import textvec

DRIVER = os.path.join("tools", "replay_main.c")
#: Seconds one replay of a vector set may take before a build is taken as hung.
RUN_TIMEOUT_S = 120


def c_ref_dir():
    """The C reference folder (c_ref/)."""
    from c_ref.cortexm.build import C_REF
    return C_REF


def algo_sources():
    """The firmware's C files (names in c_ref/), as the Cortex-M build lists them today."""
    from c_ref.cortexm.build import ALGO_SOURCES
    return tuple(ALGO_SOURCES)


def gcc_missing():
    """``None`` if gcc and gcov are on PATH, else why not (for skips and one-line errors)."""
    missing = [t for t in ("gcc", "gcov") if shutil.which(t) is None]
    return f"{' and '.join(missing)} not found on PATH (Debian package gcc)" if missing else None


def replay_cases(params, vectors):
    """The operations the measures replay, one list per case (ld_init before each).

    Each vector (``(adc_v, adc_i)`` code arrays) is replayed twice: through ld_step, as its CSV
    holds it, and through the interrupt path (ld_step_isr, with ld_window_work after each
    sample) in a second pass. In that pass each vector's third window is handed over with no
    window work for a whole window (the next window end finds it late), and the longest vector
    gets no window work at all (every window after the first is late, past the counter's
    saturation in a vector of 256 windows or more).
    """
    cases = [textvec.samples(v, i) for v, i in vectors]
    longest = max(range(len(vectors)), key=lambda k: len(vectors[k][0]))
    n = 1 << params.window_log2
    for k, (v, i) in enumerate(vectors):
        held = set(range(len(v))) if k == longest else set(range(2 * n - 1, 3 * n))
        cases.append(textvec.isr_samples(v, i, [t for t in range(len(v)) if t not in held]))
    return cases


def vector_text(params, cases):
    """One LDTV text holding every case of :func:`replay_cases` (ld_init before each)."""
    return textvec.dumps([(params, ops) for ops in cases])


def compile_object(src, obj, flags, include, prefix=()):
    """Compile one C file (``prefix``: e.g. a nice command); return ``None`` on success, else the
    compiler's message."""
    res = subprocess.run([*prefix, "gcc", *flags, "-I", include, "-c", src, "-o", obj],
                         capture_output=True, text=True)
    return None if res.returncode == 0 else (res.stderr or res.stdout)


def link(objs, exe, flags, prefix=()):
    """Link objects into ``exe``; return ``None`` on success, else the linker's message."""
    res = subprocess.run([*prefix, "gcc", *flags, *objs, "-o", exe], capture_output=True, text=True)
    return None if res.returncode == 0 else (res.stderr or res.stdout)


def build_driver(out_dir, flags, src_dir=None):
    """Build the replay driver with the firmware sources of ``src_dir`` (default c_ref) into ``out_dir``.

    Returns the executable's path; raises RuntimeError with the compiler's message on failure.
    """
    src_dir = src_dir or c_ref_dir()
    os.makedirs(out_dir, exist_ok=True)
    objs = []
    for name in (DRIVER, *algo_sources()):
        obj = os.path.join(out_dir, os.path.basename(name)[:-2] + ".o")
        err = compile_object(os.path.join(src_dir, name), obj, flags, src_dir)
        if err:
            raise RuntimeError(f"{name}: does not compile: {err.strip()[:400]}")
        objs.append(obj)
    exe = os.path.join(out_dir, "replay")
    err = link(objs, exe, flags)
    if err:
        raise RuntimeError(f"linking the replay driver failed: {err.strip()[:400]}")
    return exe


def replay(exe, text_path, cwd=None, prefix=()):
    """Run the driver on a vector text file; return ``(exit status, stdout bytes)``.

    A run over RUN_TIMEOUT_S returns status None.
    """
    try:
        res = subprocess.run([*prefix, exe, text_path], capture_output=True, timeout=RUN_TIMEOUT_S, cwd=cwd)
    except subprocess.TimeoutExpired:
        return None, b""
    return res.returncode, res.stdout
