"""Python face of the host-only compiled closed loop: numpy arrays in, ``ldp_run`` stepping them in place."""
import numpy as np

try:
    from c_ref.host._plant_loop_cffi import ffi, lib
except ImportError as exc:  # pragma: no cover - exercised only on a broken install
    raise ImportError("the compiled closed loop is not built; run 'pip install .' in the project root") from exc

#: Why ldp_run stopped, by its code.
REASONS = {lib.LDP_DONE: "done", lib.LDP_WINDOW: "window",
           lib.LDP_STUCK: "stuck", lib.LDP_NOISE: "noise"}
N_REC = lib.LDP_N_REC
_CTYPE = {np.dtype(np.float64): "double *", np.dtype(np.float32): "float *", np.dtype(np.uint8): "uint8_t *",
          np.dtype(np.int32): "int32_t *", np.dtype(np.int64): "int64_t *"}


class LoopBatch:
    """One ``ldp_batch_t`` whose pointer fields are numpy arrays held alive here.

    Parameters
    ----------
    n : int
        Scenarios.
    dt_s : float
        Sample period, s.
    """

    def __init__(self, n, dt_s):
        self._b = ffi.new("ldp_batch_t *")
        self._b.n, self._b.dt_s = n, dt_s
        self._held = {}
        self._why = ffi.new("int *")

    def set(self, **fields):
        """Set scalar fields, or point array fields at C-contiguous numpy arrays (None: NULL)."""
        for name, value in fields.items():
            if value is None:
                setattr(self._b, name, ffi.NULL)
                self._held.pop(name, None)
            elif isinstance(value, np.ndarray):
                if not value.flags.c_contiguous:
                    raise ValueError(f"{name}: array must be C-contiguous")
                setattr(self._b, name, ffi.cast(_CTYPE[value.dtype], ffi.from_buffer(value)))
                self._held[name] = value
            else:
                setattr(self._b, name, value)

    def set_algorithm(self, params, states):
        """Point at the C algorithm's params and states (numpy arrays of c_ref.binding's dtypes)."""
        self._b.params = ffi.cast("ld_params_t *", ffi.from_buffer(params))
        self._b.states = ffi.cast("ld_state_t *", ffi.from_buffer(states))
        self._held["params"], self._held["states"] = params, states

    def set_recording(self, arrays):
        """Point the recorded channels at float32 arrays (rows, n), in ldp_batch_t.rec order; None skips."""
        for i in range(N_REC):
            a = arrays[i] if i < len(arrays) else None
            self._b.rec[i] = ffi.NULL if a is None else ffi.cast("float *", ffi.from_buffer(a))
            self._held[f"rec{i}"] = a

    def on_refresh(self, fn):
        """Point ``numpy_refresh`` at ``fn(j)``; returns the callback, which the caller keeps alive."""
        cb = ffi.callback("void(size_t)", fn)
        self._b.numpy_refresh = cb
        self._held["numpy_refresh"] = cb
        return cb

    def refreshes(self):
        """Discretisations ldp_run refreshed so far."""
        return int(self._b.refreshes)

    def run(self, k0, n_samples, rec_row):
        """Run samples ``k0 ..`` (at most ``n_samples``); returns (samples done, reason name)."""
        done = lib.ldp_run(self._b, k0, n_samples, rec_row, self._why)
        return done, REASONS[self._why[0]]


def systems(r, l, c, esr, g, omega, is_open, dt_s):
    """plant_systems.c's step matrices of one scenario: w0 (5, 5) and w1 (6, 5), laid out as
    ``DiscreteSystems.w[mode][:, :, j]`` (input, output)."""
    w0, w1 = np.empty((5, 5)), np.empty((6, 5))
    lib.ldp_systems(r, l, c, esr, g, omega, int(is_open), dt_s, ffi.cast("double *", ffi.from_buffer(w0)),
                    ffi.cast("double *", ffi.from_buffer(w1)))
    return w0, w1
