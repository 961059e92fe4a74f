"""Supply-side ADC (voltage and current to unsigned codes) and the command DAC, batched."""

import concurrent.futures

import numpy as np

#: Noise samples drawn per scenario at a time (the noise sequence does not depend on it).
_NOISE_BLOCK = 4096
#: Scenarios whose noise blocks are transposed together (keeps the transpose in cache).
_TRANSPOSE_CHUNK = 64


class Adc:
    """Two-channel ADC of B scenarios: supply voltage and supply current to unsigned codes.

    ``code = round_half_up(x / full_scale * 2**bits * (1 + gain_error) + offset_lsb + noise)``,
    clipped to [0, 2**bits - 1], where ``noise`` is white Gaussian with ``noise_lsb_rms`` LSB rms
    drawn from a per-scenario ``numpy.random.Generator``, so a scenario's codes do not depend on
    which other scenarios share its batch.

    Parameters
    ----------
    sensing : sequence of harness.scenario.specs.SensingSpec
        One per scenario.
    seeds : sequence of int
        One seed per scenario.
    """

    def __init__(self, sensing, seeds):
        self.specs = list(sensing)

        def arr(fn):
            return np.array([fn(s) for s in self.specs], dtype=float)

        self.bits = np.array([s.adc_bits for s in self.specs], dtype=np.int64)
        self.code_max = (1 << self.bits) - 1
        self.v_lsb_per_v = 2.0**self.bits / arr(lambda s: s.v_full_scale_v)
        self.i_lsb_per_a = 2.0**self.bits / arr(lambda s: s.i_full_scale_a)
        # (2, B): the voltage channel, then the current channel with its own error on top.
        self.gain = 1.0 + np.stack([arr(lambda s: s.gain_error),
                                    arr(lambda s: s.gain_error + s.current_gain_error)])
        self.offset = np.stack([arr(lambda s: s.offset_lsb), arr(lambda s: s.offset_lsb + s.current_offset_lsb)])
        self.sigma = arr(lambda s: s.noise_lsb_rms)
        self._rngs = [np.random.default_rng(seed) for seed in seeds]
        n = len(self.specs)
        self._lsb = np.stack([self.v_lsb_per_v, self.i_lsb_per_a])
        self._code_max = self.code_max.astype(float)
        self._raw = np.empty((2, n))
        self._noise = np.zeros((0, 2, n))
        self._pos = 0
        self._next = None
        self._bufs, self._scratch, self._which = [None, None], None, 0
        self._rows_drawn, self._rows_wanted, self._pool = 0, None, None

    def plan(self, n_samples):
        """The run takes ``n_samples`` samples' noise: the first block is drawn now on the
        worker (while the caller sets up the rest) and none past them (the blocks, and so the
        noise, stay the same)."""
        self._rows_wanted = int(n_samples)
        if self._pool is None and self._rows_wanted > 0:
            self._start()

    def _start(self):
        self._pool = concurrent.futures.ThreadPoolExecutor(max_workers=1)
        self._next = self._pool.submit(self._block, self._which)

    def _block(self, which):
        """Fill and return noise buffer ``which`` (0 or 1) with the next (block, 2, B) array of
        scaled noise (LSB).

        Each scenario's generator fills a (2, block) array; those are transposed a few
        scenarios at a time into sample-major order, so a sample's noise is contiguous. The two
        buffers take turns (one is read while the worker fills the other), so a long run
        allocates no new memory for its noise."""
        n = len(self._rngs)
        if self._bufs[which] is None:
            self._bufs[which] = np.empty((_NOISE_BLOCK, 2, n))
            if self._scratch is None:
                self._scratch = np.empty((min(n, _TRANSPOSE_CHUNK), 2, _NOISE_BLOCK))
        noise, scratch = self._bufs[which], self._scratch
        for b0 in range(0, n, _TRANSPOSE_CHUNK):
            rngs = self._rngs[b0:b0 + _TRANSPOSE_CHUNK]
            for j, rng in enumerate(rngs):
                rng.standard_normal(out=scratch[j])
            noise[:, :, b0:b0 + len(rngs)] = scratch[:len(rngs)].transpose(2, 1, 0)
        noise *= self.sigma
        return noise

    def _draw(self):
        """Scaled noise (LSB) of both channels for the next sample, (2, B).

        Blocks are drawn one ahead on a worker thread (numpy's generators release the GIL, so
        this uses the second core); one worker draws them strictly in order, so the noise
        sequence is the same as drawing them here."""
        if self._pos >= self._noise.shape[0]:
            if self._pool is None:
                self._start()
            if self._next is None:    # past the planned run: drawn here, in the same order
                self._noise = self._block(self._which)
            else:
                self._noise = self._next.result()
            self._rows_drawn += _NOISE_BLOCK
            self._which ^= 1
            wanted = self._rows_wanted is None or self._rows_drawn < self._rows_wanted
            self._next = self._pool.submit(self._block, self._which) if wanted else None
            self._pos = 0
        self._pos += 1
        return self._noise[self._pos - 1]

    def noise_ahead(self):
        """The scaled noise (LSB) of the next samples without taking it, (rows, 2, B), at least
        one row; :meth:`take` then takes the rows a caller used (the compiled closed loop)."""
        if self._pos >= self._noise.shape[0]:
            self._draw()
            self._pos -= 1
        return self._noise[self._pos:]

    def take(self, rows):
        """Take ``rows`` samples' noise from :meth:`noise_ahead`'s block."""
        self._pos += rows

    def close(self):
        """Stop the noise worker (drawing nothing more)."""
        if self._pool is not None:
            if self._next is not None:
                self._next.cancel()
            self._pool.shutdown(wait=True)
            self._next = None

    def convert(self, v_supply_v, i_supply_a, stuck_v=None, stuck_i=None):
        """Convert one sample of each scenario.

        Parameters
        ----------
        v_supply_v : ndarray, shape (B,)
            True supply-terminal voltage, V.
        i_supply_a : ndarray, shape (B,)
            True supply current, A (negative currents read as code 0).
        stuck_v, stuck_i : ndarray of int, shape (B,), optional
            Forced code per scenario (an ``adc_stuck`` fault), -1 where not stuck.

        Returns
        -------
        v_code, i_code : ndarray of int64, shape (B,)
            Codes in [0, 2**adc_bits - 1].
        """
        raw = self._raw
        raw[0], raw[1] = v_supply_v, i_supply_a
        np.multiply(raw, self._lsb, out=raw)
        np.multiply(raw, self.gain, out=raw)
        np.add(raw, self.offset, out=raw)
        np.add(raw, self._draw(), out=raw)
        np.add(raw, 0.5, out=raw)
        np.floor(raw, out=raw)
        np.maximum(raw, 0.0, out=raw)
        np.minimum(raw, self._code_max, out=raw)
        v_code, i_code = raw.astype(np.int64)
        if stuck_v is not None:
            v_code = np.where(stuck_v >= 0, stuck_v, v_code)
        if stuck_i is not None:
            i_code = np.where(stuck_i >= 0, stuck_i, i_code)
        return v_code, i_code


class Dac:
    """Command DAC of B scenarios: ``volts = code * dac_full_scale_v * (1 + dac_gain_error) / 2**dac_bits``
    (the supply's own setpoint gain error: the firmware assumes the nominal full scale).

    Parameters
    ----------
    supplies : sequence of harness.scenario.specs.SupplySpec
        One per scenario (``dac_bits``, ``dac_full_scale_v``).
    """

    def __init__(self, supplies):
        self.bits = np.array([s.dac_bits for s in supplies], dtype=np.int64)
        self.code_max = (1 << self.bits) - 1
        self.v_per_code = (np.array([s.dac_full_scale_v for s in supplies], dtype=float)
                           * np.array([1.0 + s.dac_gain_error for s in supplies])) / 2.0**self.bits

    def to_volts(self, code):
        """Output voltage (V) for integer ``code`` (B,), clipped to [0, 2**dac_bits - 1]."""
        return np.clip(np.asarray(code, dtype=np.int64), 0, self.code_max) * self.v_per_code

    def to_code(self, volts):
        """Nearest code (int64, (B,)) for ``volts`` (V), clipped to the code range."""
        raw = np.floor(np.asarray(volts, dtype=float) / self.v_per_code + 0.5)
        return np.clip(raw, 0, self.code_max).astype(np.int64)
