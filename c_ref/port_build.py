"""Build a firmware port of the C reference (a folder of ``*.c`` and its ``linedrop.h``) through cffi and step it.

The port's sources are first compiled alone with the strict warning flags
(warnings are errors), then linked into a cffi API-mode module in a temporary
folder together with a small loop that records the state after every step.
Before anything is compiled, the port's ``ld_params_t`` and ``ld_state_t`` are
compared field by field with the reference's.
"""
import contextlib
import glob
import hashlib
import importlib.util
import os
import re
import shlex
import shutil
import subprocess
import sysconfig
import tempfile

import numpy as np
from cffi import FFI, CDefError, VerificationError

from c_ref.build_ffi import HERE, cdef_text

STRICT = ("-std=c99", "-Wall", "-Wextra", "-Wconversion", "-Wsign-conversion", "-pedantic", "-Werror")
STRUCTS = ("ld_params_t", "ld_state_t")
API = ("ld_init", "ld_reset", "ld_step")
#: Fields of the reference's structs a port may leave out (padding made explicit); none: the
#: model's State and Params have no padding fields.
OPTIONAL_FIELDS = set()
#: Compiler output lines shown after the first error.
EXCERPT_LINES = 6

_TRACE_SOURCE = r"""
#include "linedrop.h"

/* Step n samples from the state in s; record each command and the state after it. */
static void ldpc_trace(const ld_params_t *p, ld_state_t *s, const uint16_t *adc_v,
                       const uint16_t *adc_i, size_t n, uint16_t *cmd, ld_state_t *trace)
{
    size_t k;
    for (k = 0; k < n; k++) {
        cmd[k] = ld_step(p, s, adc_v[k], adc_i[k]);
        trace[k] = *s;
    }
}
"""
_PROTOTYPES = """
void ld_init(const ld_params_t *p, ld_state_t *s);
void ld_reset(const ld_params_t *p, ld_state_t *s);
uint16_t ld_step(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i);
void ldpc_trace(const ld_params_t *p, ld_state_t *s, const uint16_t *adc_v, const uint16_t *adc_i,
                size_t n, uint16_t *cmd, ld_state_t *trace);
"""
_NP_TYPES = {"int8_t": "i1", "uint8_t": "u1", "int16_t": "=i2", "uint16_t": "=u2", "int32_t": "=i4",
             "uint32_t": "=u4", "int64_t": "=i8", "uint64_t": "=u8"}
_loaded = {}


class PortError(Exception):
    """The port cannot be built or loaded. ``str`` is one line, then any compiler excerpt indented."""

    def __init__(self, message, detail=()):
        super().__init__("\n".join([message, *("    " + line for line in detail)]))


def _type_name(t):
    return f"{t.item.cname}[{t.length}]" if t.kind == "array" else t.cname


def struct_fields(header):
    """``{struct: [(field, C type), ...]}`` of ld_params_t and ld_state_t as ``header`` declares them."""
    ffi = FFI()
    try:
        ffi.cdef(cdef_text(header))
    except CDefError as exc:
        raise PortError(f"{header}: cannot read the struct declarations: {str(exc).splitlines()[0]}") from None
    out = {}
    for struct in STRUCTS:
        try:
            out[struct] = [(name, _type_name(f.type)) for name, f in ffi.typeof(struct).fields]
        except (ffi.error, TypeError):
            raise PortError(f"{header}: does not declare the struct type {struct}") from None
    return out


def check_layout(header):
    """Raise PortError unless ``header`` declares every reference field with the reference's type."""
    want, got = struct_fields(os.path.join(HERE, "linedrop.h")), struct_fields(header)
    for struct in STRUCTS:
        have = dict(got[struct])
        for name, ctype in want[struct]:
            if name in OPTIONAL_FIELDS:
                continue
            if name not in have:
                raise PortError(f"{header}: {struct} has no field {name} ({ctype}); the model's {struct} "
                                f"has {', '.join(n for n, _ in want[struct] if n not in OPTIONAL_FIELDS)}")
            if have[name] != ctype:
                raise PortError(f"{header}: {struct}.{name} is {have[name]}; the model's is {ctype}")
    text = open(header, encoding="utf-8", errors="replace").read()
    for fn in API:
        if not re.search(r"\b" + fn + r"\s*\(", text):
            raise PortError(f"{header}: does not declare {fn}(); the port must implement "
                            f"{', '.join(API)} as in c_ref/linedrop.h")


def _compiler():
    argv = shlex.split(os.environ.get("CC") or sysconfig.get_config_var("CC") or "cc")
    if not argv or not shutil.which(argv[0]):
        raise PortError(f"no C compiler found ({' '.join(argv) or 'cc'}); install gcc or set CC")
    return argv


def _first_error(output):
    lines = output.splitlines()
    at = next((k for k, ln in enumerate(lines) if "error" in ln and not ln.startswith("In file")), 0)
    return (lines[at] if lines else "no output"), lines[at + 1:at + 1 + EXCERPT_LINES]


def compile_strict(c_dir, sources, work):
    """Compile each source alone under STRICT; return the object files."""
    cc, objs = _compiler(), []
    for k, src in enumerate(sources):
        obj = os.path.join(work, f"port{k}.o")
        res = subprocess.run([*cc, *STRICT, "-O2", "-fPIC", "-I", c_dir, "-c", src, "-o", obj],
                             capture_output=True, text=True)
        if res.returncode != 0:
            first, rest = _first_error(res.stderr)
            raise PortError(f"{src}: does not compile under {' '.join(STRICT)}: {first}", rest)
        objs.append(obj)
    return objs


@contextlib.contextmanager
def _quiet_fds(path):
    """Send this process's stdout and stderr file descriptors to ``path`` (compiler chatter)."""
    saved = [os.dup(1), os.dup(2)]
    with open(path, "w") as sink:
        os.dup2(sink.fileno(), 1)
        os.dup2(sink.fileno(), 2)
        try:
            yield
        finally:
            os.dup2(saved[0], 1)
            os.dup2(saved[1], 2)
            for fd in saved:
                os.close(fd)


def _cdef(header):
    text = cdef_text(header)
    defines = [ln for ln in text.splitlines() if ln.startswith("#define")]
    blocks = re.findall(r"typedef\s+struct\s*\w*\s*\{[^{}]*\}\s*(?:ld_params_t|ld_state_t)\s*;", text)
    return "\n".join(defines + blocks) + _PROTOTYPES


def build_port(c_dir):
    """Check, compile and load the port in ``c_dir``; return a :class:`Port`."""
    header = os.path.join(c_dir, "linedrop.h")
    if not os.path.isdir(c_dir):
        raise PortError(f"{c_dir}: no such directory of C sources")
    if not os.path.isfile(header):
        raise PortError(f"{c_dir}: no linedrop.h; the port's header must sit beside its *.c files")
    sources = sorted(glob.glob(os.path.join(c_dir, "*.c")))
    if not sources:
        raise PortError(f"{c_dir}: no *.c files to build")
    check_layout(header)
    digest = hashlib.sha256()
    for path in [header] + sources + sorted(glob.glob(os.path.join(c_dir, "*.h"))):
        with open(path, "rb") as f:
            digest.update(path.encode() + b"\0" + f.read())
    name = "_ldport_" + digest.hexdigest()[:16]
    if name not in _loaded:
        with tempfile.TemporaryDirectory(prefix="ldport-") as work:
            objs = compile_strict(c_dir, sources, work)
            ffi = FFI()
            ffi.cdef(_cdef(header))
            ffi.set_source(name, _TRACE_SOURCE, include_dirs=[os.path.abspath(c_dir)], extra_objects=objs,
                           extra_compile_args=["-std=c99", "-O2"])
            log = os.path.join(work, "cffi.log")
            try:
                with _quiet_fds(log):
                    so = ffi.compile(tmpdir=work, verbose=False)
            except (VerificationError, OSError) as exc:
                first, rest = _first_error(open(log).read())
                raise PortError(f"{c_dir}: the cffi wrapper around the port does not build "
                                f"({exc.__class__.__name__}): {first}", rest) from None
            spec = importlib.util.spec_from_file_location(name, so)
            try:
                mod = importlib.util.module_from_spec(spec)
                spec.loader.exec_module(mod)
            except ImportError as exc:
                why = str(exc).rsplit(".so: ", 1)[-1]
                raise PortError(f"{c_dir}: the port does not load: {why}; "
                                f"it must define {', '.join(API)}") from None
        _loaded[name] = Port(mod.ffi, mod.lib)
    return _loaded[name]


class Port:
    """A loaded port: ``trace`` runs ADC codes through ld_init + ld_step and records everything."""

    def __init__(self, ffi, lib):
        self.ffi, self.lib = ffi, lib
        kept = [(name, f) for name, f in ffi.typeof("ld_state_t").fields
                if f.type.kind != "array" and f.type.cname in _NP_TYPES]
        self.state_dtype = np.dtype({"names": [n for n, _ in kept],
                                     "formats": [_NP_TYPES[f.type.cname] for _, f in kept],
                                     "offsets": [f.offset for _, f in kept],
                                     "itemsize": ffi.sizeof("ld_state_t")})

    def params(self, values):
        """A C ``ld_params_t`` filled from ``values`` (a mapping or an object with the fields)."""
        p = self.ffi.new("ld_params_t *")
        for name, _ in self.ffi.typeof("ld_params_t").fields:
            value = values[name] if isinstance(values, dict) else getattr(values, name, None)
            if value is not None:
                setattr(p, name, list(value) if name == "ref_tab" else int(value))
        return p

    def trace(self, params, adc_v, adc_i, fields):
        """Commands and state after each sample from ld_init, as int64 (T, 1 + len(fields))."""
        ffi = self.ffi
        p, s = self.params(params), ffi.new("ld_state_t *")
        self.lib.ld_init(p, s)
        v = np.ascontiguousarray(adc_v, dtype=np.uint16)
        i = np.ascontiguousarray(adc_i, dtype=np.uint16)
        cmd = np.empty(len(v), dtype=np.uint16)
        states = np.zeros(len(v), dtype=self.state_dtype)
        self.lib.ldpc_trace(p, s, ffi.from_buffer("uint16_t[]", v), ffi.from_buffer("uint16_t[]", i), len(v),
                            ffi.from_buffer("uint16_t[]", cmd), ffi.cast("ld_state_t *", ffi.from_buffer(states)))
        return np.column_stack([cmd.astype(np.int64)] + [states[f].astype(np.int64) for f in fields])
