"""One backend-neutral way to run the algorithm: Python fixed-point model, C reference, float ideal.

Every backend steps ``n`` independent instances in lockstep and offers
``step(adc_v, adc_i) -> commands``, ``run`` over (n, T) arrays, ``state(k)``
and ``states()``. Commands are DAC codes (fractional for the ideal).
"""
from algo.params import derive

BACKENDS = ("model", "c", "ideal")


def derived(cfgs):
    """``algo.params.derive`` of each AlgoConfig, derived once for equal configs (a batch of
    copies derives one)."""
    done = {}
    return [done[c] if c in done else done.setdefault(c, derive(c)) for c in cfgs]


def make(backend, cfgs):
    """Build ``len(cfgs)`` instances of ``backend`` from a list of AlgoConfig."""
    if backend == "model":
        from algo.batch import BatchModel
        return BatchModel(derived(cfgs))
    if backend == "c":
        from c_ref.binding import CBatch
        return CBatch(derived(cfgs))
    if backend == "ideal":
        from algo.ideal import IdealBatch
        return IdealBatch(cfgs)
    raise ValueError(f"unknown backend {backend!r}; choose one of {', '.join(BACKENDS)}")


def compiled_loop():
    """The host-only compiled closed loop's binding (c_ref.host.binding)."""
    from c_ref.host import binding
    return binding


def compiled_loop_missing():
    """Why the compiled closed loop cannot be loaded, or None when it can."""
    try:
        compiled_loop()
    except ImportError as exc:
        return f"the compiled closed loop is not built ({exc})"
    return None
