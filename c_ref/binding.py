"""Python face of the compiled C reference: batched instances with numpy in and out.

Sizes, version and field layout are read from C at import and checked
against the Python model, so the two cannot drift apart silently.
"""
import numpy as np

from algo import VERSION
from algo.params import PARAM_FIELDS, TAB_MAX, Params
from algo.state import STATE_FIELDS

try:
    from c_ref._linedrop_cffi import ffi, lib
except ImportError as exc:  # pragma: no cover - exercised only on a broken install
    raise ImportError("the C reference is not built; run 'pip install .' in the project root") from exc

_major, _minor, _patch = (int(x) for x in VERSION.split("."))
if lib.ld_version() != (_major << 16) | (_minor << 8) | _patch:
    raise ImportError(f"C reference version {lib.ld_version():#x} does not match algo {VERSION}")
if lib.LD_TAB_MAX != TAB_MAX:
    raise ImportError("LD_TAB_MAX differs between c_ref and algo")
if [f[0] for f in ffi.typeof("ld_state_t").fields] != STATE_FIELDS:
    raise ImportError("ld_state_t fields differ from algo.state.State")
if [f[0] for f in ffi.typeof("ld_params_t").fields] != PARAM_FIELDS:
    raise ImportError("ld_params_t fields differ from algo.params.Params")

_CTYPES = {"int32_t": "<i4", "uint32_t": "<u4", "uint16_t": "<u2", "uint8_t": "u1", "int16_t": "<i2"}


def _dtype(ctype):
    names, formats, offsets = [], [], []
    for name, field in ffi.typeof(ctype).fields:
        names.append(name)
        t = field.type
        formats.append((_CTYPES[t.item.cname], t.length) if t.kind == "array" else _CTYPES[t.cname])
        offsets.append(field.offset)
    return np.dtype({"names": names, "formats": formats, "offsets": offsets,
                     "itemsize": ffi.sizeof(ctype)})


STATE_DTYPE = _dtype("ld_state_t")
PARAMS_DTYPE = _dtype("ld_params_t")


def params_array(params_list):
    """Pack a list of :class:`algo.params.Params` into a C-layout numpy array."""
    arr = np.zeros(len(params_list), dtype=PARAMS_DTYPE)
    for k, p in enumerate(params_list):
        for name in PARAM_FIELDS:
            arr[name][k] = getattr(p, name)
    return arr


class CBatch:
    """``n`` independent C instances, each with its own parameters.

    Parameters
    ----------
    params_list : list of Params
        One parameter block per instance.
    """

    def __init__(self, params_list):
        if isinstance(params_list, Params):
            params_list = [params_list]
        self.n = len(params_list)
        self._params = params_array(params_list)
        self._states = np.zeros(self.n, dtype=STATE_DTYPE)
        self._p = ffi.cast("ld_params_t *", ffi.from_buffer(self._params))
        self._s = ffi.cast("ld_state_t *", ffi.from_buffer(self._states))
        for k in range(self.n):
            lib.ld_init(self._p + k, self._s + k)

    def init(self, k):
        """Re-initialise instance ``k``."""
        lib.ld_init(self._p + k, self._s + k)

    def reset(self, k):
        """Reset instance ``k`` (keeps its resistance estimate)."""
        lib.ld_reset(self._p + k, self._s + k)

    def run(self, adc_v, adc_i):
        """Step every instance over its row of samples.

        Parameters
        ----------
        adc_v, adc_i : array_like of uint16, shape (n, T) or (n,)
            ADC codes; row k feeds instance k.

        Returns
        -------
        numpy.ndarray of uint16, same shape: the command code after each sample.
        """
        v = np.ascontiguousarray(adc_v, dtype=np.uint16)
        i = np.ascontiguousarray(adc_i, dtype=np.uint16)
        if v.shape != i.shape or v.shape[0] != self.n:
            raise ValueError(f"inputs must both have shape ({self.n}, T) or ({self.n},)")
        out = np.empty_like(v)
        t = 1 if v.ndim == 1 else v.shape[1]
        lib.ld_step_batch(self._p, self._s, self.n, ffi.from_buffer("uint16_t[]", v),
                          ffi.from_buffer("uint16_t[]", i), t, ffi.from_buffer("uint16_t[]", out))
        return out

    def field(self, name):
        """Live view of state field ``name`` across instances."""
        return self._states[name]

    def state(self, k=0):
        """Every state field of instance ``k`` as a dict of ints."""
        row = self._states[k]
        return {name: int(row[name]) for name in STATE_FIELDS}

    def states(self):
        """Every state field of every instance, as a dict of numpy arrays (copies)."""
        return {name: self._states[name].copy() for name in STATE_FIELDS}

    def step(self, adc_v, adc_i):
        """One sample for every instance: inputs of shape (n,), commands out."""
        return self.run(adc_v, adc_i)

    def step_isr(self, k, adc_v, adc_i):
        """One sample of instance ``k`` through the interrupt path (``ld_step_isr``); its command."""
        return int(lib.ld_step_isr(self._p + k, self._s + k, adc_v, adc_i))

    def window_work(self, k):
        """The main loop's window work for instance ``k`` (``ld_window_work``); 1 if it did one."""
        return int(lib.ld_window_work(self._p + k, self._s + k))
