"""Cross-build helpers for Cortex-M: compile the algorithm, link QEMU and bare emulator images.

No Makefile: each function runs ``arm-none-eabi-gcc`` with the same flags a
firmware build would use and returns the paths it wrote. ``cpu`` is a key of
:data:`CPUS`; ``opt`` is a gcc optimisation flag such as ``"-Os"``.
"""
import functools
import os
import re
import shutil
import subprocess
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
C_REF = os.path.dirname(HERE)
GCC = "arm-none-eabi-gcc"
QEMU = "qemu-system-arm"
QEMU_MACHINE = "mps2-an386"

CPUS = {"m4": "cortex-m4", "m0plus": "cortex-m0plus"}
# The firmware needs these three files and the headers; batch.c is host-only.
ALGO_SOURCES = ("step.c", "estimator.c", "fixed.c")
WARNINGS = ("-std=c99", "-Wall", "-Wextra", "-Wconversion", "-Wsign-conversion", "-pedantic",
            "-Werror")
# Entry points an application calls; everything else is reached from them.
API = ("ld_init", "ld_reset", "ld_step", "ld_step_isr", "ld_window_work", "ld_state_size",
       "ld_params_size", "ld_version")


def arch_flags(cpu):
    """``-mcpu``/``-mthumb`` flags for ``cpu`` (soft-float ABI: the algorithm has no float)."""
    return [f"-mcpu={CPUS[cpu]}", "-mthumb", "-mfloat-abi=soft"]


def _run(cmd):
    res = subprocess.run(cmd, capture_output=True, text=True)
    if res.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)}\n{res.stdout}{res.stderr}")
    return res


@functools.lru_cache(maxsize=None)
def toolchain_missing():
    """``None`` if the cross compiler and newlib's semihosting library link a program, else why not."""
    if shutil.which(GCC) is None:
        return f"{GCC} not found on PATH (apt install gcc-arm-none-eabi)"
    failed = link_fails(lambda src, out: link_semihosting("m4", "-Os", src, out, sources=()))
    if failed:
        return f"{GCC} cannot link a semihosting image (apt install libnewlib-arm-none-eabi): {failed}"
    return None


def link_fails(link):
    """``None`` if ``link(c_file, elf_path)`` links an empty ``main``, else the tail of its error."""
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "probe.c")
        with open(src, "w") as f:
            f.write("int main(void) { return 0; }\n")
        try:
            link(src, os.path.join(tmp, "probe.elf"))
        except RuntimeError as exc:
            return str(exc)[-200:]
    return None


@functools.lru_cache(maxsize=None)
def qemu_missing(qemu=QEMU, machine=QEMU_MACHINE, package="qemu-system-arm"):
    """``None`` if ``qemu`` (default: the mps2-an386 board's) can emulate ``machine``, else why not."""
    if shutil.which(qemu) is None:
        return f"{qemu} not found on PATH (apt install {package})"
    res = subprocess.run(["timeout", "20", qemu, "-machine", "help"], capture_output=True, text=True)
    if machine not in res.stdout.split():
        return f"{qemu} has no {machine} machine"
    return None


def compile_algo(cpu, opt, out_dir, extra=()):
    """Compile the firmware sources warning-free; return the object paths.

    Also writes ``.su`` (stack usage) and ``.ci`` (call graph) files next to
    each object for :func:`worst_stack`.
    """
    os.makedirs(out_dir, exist_ok=True)
    objs = []
    for src in ALGO_SOURCES:
        obj = os.path.join(out_dir, src.replace(".c", ".o"))
        _run([GCC, *arch_flags(cpu), opt, *WARNINGS, "-ffunction-sections", "-fdata-sections",
              "-fstack-usage", "-fcallgraph-info=su", "-g", *extra, "-I", C_REF, "-c",
              os.path.join(C_REF, src), "-o", obj])
        objs.append(obj)
    return objs


def link_semihosting(cpu, opt, main_src, out, sources=ALGO_SOURCES, extra=()):
    """Link ``main_src`` with the start-up code, linker script and newlib semihosting (rdimon).

    ``main_src`` may be any C file with ``int main(void)``; the algorithm
    sources are compiled with the strict warning set. Returns ``out``.
    """
    srcs = [os.path.join(HERE, "startup.c"), main_src] + [os.path.join(C_REF, s) for s in sources]
    _run([GCC, *arch_flags(cpu), opt, "-std=c99", "-Wall", "-Wextra", "-ffunction-sections",
          "-fdata-sections", *extra, "-I", C_REF, "--specs=rdimon.specs", "-nostartfiles",
          "-T", os.path.join(HERE, "cortexm.ld"), "-Wl,--gc-sections", *srcs, "-o", out])
    return out


def link_bare(cpu, opt, out_dir):
    """Link the algorithm alone (no start-up, no main) for the unicorn emulator.

    The image keeps the public API and whatever libc/libgcc routines it pulls
    in (``memset``, 64-bit division). Returns ``(elf_path, object_paths)``.
    """
    objs = compile_algo(cpu, opt, out_dir)
    elf = os.path.join(out_dir, "linedrop_bare.elf")
    keep = [f"-Wl,-u,{name}" for name in API]
    _run([GCC, *arch_flags(cpu), opt, "-nostdlib", "-T", os.path.join(HERE, "cortexm.ld"),
          "-Wl,-e,ld_step", "-Wl,--gc-sections", *keep, *objs, "-lc", "-lgcc", "-o", elf])
    return elf, objs


def worst_stack(objs):
    """Deepest call chain's stack bytes from gcc's ``.ci`` call graphs of ``objs``.

    Returns ``(bytes, chain, unknown)``: ``chain`` is the list of function
    names on the deepest path from ``ld_step``; ``unknown`` lists callees
    with no stack figure (library routines such as ``__aeabi_ldivmod``),
    counted as zero here and measured in the emulator instead.
    """
    size, edges = {}, {}
    for obj in objs:
        with open(obj[:-2] + ".ci") as f:
            text = f.read()
        for title, label in re.findall(r'node: \{ title: "([^"]+)" label: "([^"]*)"', text):
            m = re.search(r"\\n(\d+) bytes", label)
            name = title.split(":")[-1]
            if m:
                size[name] = int(m.group(1))
        for src, dst in re.findall(r'edge: \{ sourcename: "([^"]+)" targetname: "([^"]+)"', text):
            edges.setdefault(src.split(":")[-1], set()).add(dst.split(":")[-1])
    unknown = set()

    def deepest(fn, seen):
        if fn not in size:
            unknown.add(fn)
        best, chain = 0, []
        for callee in sorted(edges.get(fn, ())):
            if callee not in seen:
                b, c = deepest(callee, seen | {callee})
                if b > best:
                    best, chain = b, c
        return size.get(fn, 0) + best, [fn] + chain

    total, chain = deepest("ld_step", {"ld_step"})
    return total, chain, sorted(unknown)
