"""Building the C reference with gcc for tests: strict flags, build variants, the replay driver."""
import glob
import os
import shutil
import subprocess

C_REF = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))), "c_ref")
STRICT = ["-std=c99", "-Wall", "-Wextra", "-Wconversion", "-Wsign-conversion", "-pedantic", "-Werror"]
LIBRARY_SOURCES = ["step.c", "estimator.c", "fixed.c"]
DRIVER = os.path.join("tools", "replay_main.c")

# name -> (extra gcc flags, tool the variant needs; see tools.require_tool)
VARIANTS = {
    "O0": (["-O0"], "gcc"),
    "O2": (["-O2"], "gcc"),
    "m32-O2": (["-O2", "-m32"], "gcc-m32"),
    "ubsan-asan": (["-O1", "-g", "-fno-omit-frame-pointer", "-fsanitize=undefined,address",
                    "-fno-sanitize-recover=all"], "gcc-sanitizers"),
}


def c_sources():
    """Every C source a firmware engineer copies out: c_ref/*.c and c_ref/tools/*.c."""
    found = glob.glob(os.path.join(C_REF, "*.c")) + glob.glob(os.path.join(C_REF, "tools", "*.c"))
    return sorted(os.path.relpath(f, C_REF) for f in found)


def gcc(args, cwd=C_REF):
    """Run gcc; return the completed process (never raises on a failed build)."""
    return subprocess.run([shutil.which("gcc") or "gcc", *args], cwd=cwd, capture_output=True, text=True)


def build_driver(out_dir, variant):
    """Build the replay driver in ``variant`` into ``out_dir``; return the executable's path."""
    flags, _ = VARIANTS[variant]
    exe = os.path.join(str(out_dir), f"replay-{variant}")
    res = gcc([*STRICT, *flags, "-I.", DRIVER, *LIBRARY_SOURCES, "-o", exe])
    if res.returncode != 0:
        raise AssertionError(f"building the replay driver ({variant}) failed:\n{res.stderr}")
    return exe


def run_driver(exe, text):
    """Feed vector text on stdin; return the completed process."""
    env = dict(os.environ, UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1",
               ASAN_OPTIONS="detect_leaks=1:abort_on_error=0")
    return subprocess.run([exe], input=text, capture_output=True, text=True, env=env, timeout=120)
