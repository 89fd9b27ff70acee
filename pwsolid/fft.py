"""Batched three-dimensional FFTs on one grid (layer 2).

A :class:`FFTGrid` is built once per grid shape and reused for every transform
of an SCF run. It holds planned pyfftw transforms for batches of bands
(numpy.fft is the fallback when pyfftw cannot be imported) and counts the time
spent inside the transforms, which the benchmarks report.

Conventions (no hidden factors): for coefficients ``c_G`` of a Bloch function,
``to_real`` returns ``psi(r_j) = sum_G c_G exp(i G r_j)`` (an unnormalised
backward transform) and ``to_reciprocal`` returns ``(1/N) sum_j f(r_j)
exp(-i G r_j)``, the Fourier coefficients of a periodic field, so the two are
exact inverses.
"""

from __future__ import annotations

import math
import os
import time
from dataclasses import dataclass, field

import numpy as np

try:  # pragma: no cover - exercised by whichever branch is installed
    import pyfftw

    _HAVE_PYFFTW = True
except ImportError:  # pragma: no cover
    pyfftw = None
    _HAVE_PYFFTW = False

__all__ = ["FFTGrid", "make_fft_grid", "fast_fft_size", "default_threads", "HAVE_PYFFTW"]

HAVE_PYFFTW = _HAVE_PYFFTW


def default_threads() -> int:
    """Threads for FFTs: ``PWSOLID_THREADS`` if set, else the usable cores."""
    env = os.environ.get("PWSOLID_THREADS")
    if env and env.isdigit() and int(env) > 0:
        return int(env)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover
        return max(1, os.cpu_count() or 1)


def fast_fft_size(n: int) -> int:
    """Smallest integer >= n whose only prime factors are 2, 3, 5 and 7."""
    m = max(1, int(n))
    while True:
        k = m
        for p in (2, 3, 5, 7):
            while k % p == 0:
                k //= p
        if k == 1:
            return m
        m += 1


@dataclass(eq=False)
class FFTGrid:
    """Planned batched FFTs on a fixed real-space grid.

    Attributes
    ----------
    shape : tuple of 3 int
        Grid points along the three lattice vectors.
    batch : int
        Largest number of fields transformed in one call; longer blocks are
        cut into chunks of this size.
    threads : int
        FFTW threads.
    seconds : float
        Wall time spent inside transforms so far (for the benchmarks).
    n_transforms : int
        Number of single-field 3-D transforms done so far.
    """

    shape: tuple[int, int, int]
    batch: int = 8
    threads: int = 1
    seconds: float = 0.0
    n_transforms: int = 0
    _plans: dict = field(default_factory=dict, repr=False)
    _sphere_plans: dict = field(default_factory=dict, repr=False)
    _shared: list | None = field(default=None, repr=False)

    @property
    def size(self) -> int:
        return math.prod(self.shape)

    # -- planning ----------------------------------------------------------
    def _plan(self, nb: int):
        plan = self._plans.get(nb)
        if plan is None:
            buf = pyfftw.empty_aligned((nb, *self.shape), dtype="complex128")
            # Whole fields (densities, potentials) are transformed on every MPI process
            # alike and must give the same bits there: FFTW_MEASURE picks its algorithm
            # by timing, which can differ between processes on a busy machine, so these
            # plans are estimated; UNALIGNED keeps them from taking up measured wisdom
            # of the batched plans. They are a few transforms per SCF iteration.
            flags = ("FFTW_ESTIMATE", "FFTW_UNALIGNED", "FFTW_DESTROY_INPUT")
            fwd = pyfftw.FFTW(buf, buf, axes=(1, 2, 3), direction="FFTW_FORWARD",
                              flags=flags, threads=self.threads)
            bwd = pyfftw.FFTW(buf, buf, axes=(1, 2, 3), direction="FFTW_BACKWARD",
                              flags=flags, threads=self.threads)
            plan = self._plans[nb] = (buf, fwd, bwd)
        return plan

    # -- single fields -----------------------------------------------------
    def field_to_reciprocal(self, f: np.ndarray) -> np.ndarray:
        """Fourier coefficients of a real or complex field of shape ``shape``."""
        return self.to_reciprocal(f[None].astype(complex))[0]

    def field_to_real(self, c: np.ndarray) -> np.ndarray:
        """Field on the grid from its Fourier coefficients (complex result)."""
        return self.to_real(c[None])[0]

    # -- batches -----------------------------------------------------------
    def to_real(self, c: np.ndarray) -> np.ndarray:
        """``sum_G c_G exp(iGr)`` for a batch ``c`` of shape (nb, *shape); returns a new array."""
        return self._transform(c, backward=True, scale=1.0)

    def to_reciprocal(self, f: np.ndarray) -> np.ndarray:
        """``(1/N) sum_r f(r) exp(-iGr)`` for a batch of shape (nb, *shape); returns a new array."""
        return self._transform(f, backward=False, scale=1.0 / self.size)

    def _transform(self, a: np.ndarray, backward: bool, scale: float) -> np.ndarray:
        # ``seconds`` counts the transforms proper (the FFTW execute calls), not the
        # copies in and out of the aligned buffers.
        nb = a.shape[0]
        out = np.empty((nb, *self.shape), dtype=complex)
        if not _HAVE_PYFFTW:
            t0 = time.perf_counter()
            if backward:
                out[...] = np.fft.ifftn(a, axes=(1, 2, 3)) * self.size
            else:
                out[...] = np.fft.fftn(a, axes=(1, 2, 3)) * scale
            self.seconds += time.perf_counter() - t0
        else:
            for start in range(0, nb, self.batch):
                stop = min(nb, start + self.batch)
                buf, fwd, bwd = self._plan(stop - start)
                buf[...] = a[start:stop]
                t0 = time.perf_counter()
                if backward:
                    bwd(normalise_idft=False)
                else:
                    fwd()
                self.seconds += time.perf_counter() - t0
                out[start:stop] = buf
            if scale != 1.0:
                out *= scale
        self.n_transforms += nb
        return out

    # -- fused kernels on sphere coefficients ---------------------------------
    def _sphere_buffer(self, nb: int, grid_index: np.ndarray):
        """Buffers and plans for ``nb`` fields on the sphere ``grid_index``.

        Returns ``(src, dst, bwd, fwd, flat_index)``: ``src`` and ``dst`` are the
        leading ``nb`` fields of one aligned pair of ``batch`` fields shared by
        every block size (each size has its own plans on those rows), and
        ``flat_index`` holds the flat positions of the sphere in the first
        ``nb`` fields, so scatter and gather are single ``put``/``take`` calls.

        The backward transform runs out of place, so ``src`` keeps its zeros
        off the sphere between calls; only the entries of the previous sphere
        are cleared when the sphere (the k-point) changes. This avoids zeroing
        whole grids.
        """
        if self._shared is None:
            src = pyfftw.zeros_aligned((self.batch, *self.shape), dtype="complex128")
            dst = pyfftw.empty_aligned((self.batch, *self.shape), dtype="complex128")
            self._shared = [src, dst, None, None]
        src, dst, last, flat_index = self._shared
        plans = self._sphere_plans.get(nb)
        if plans is None:
            bwd = pyfftw.FFTW(src[:nb], dst[:nb], axes=(1, 2, 3), direction="FFTW_BACKWARD",
                              flags=("FFTW_MEASURE",), threads=self.threads)
            fwd = pyfftw.FFTW(dst[:nb], dst[:nb], axes=(1, 2, 3), direction="FFTW_FORWARD",
                              flags=("FFTW_MEASURE", "FFTW_DESTROY_INPUT"), threads=self.threads)
            src[...] = 0          # planning with FFTW_MEASURE may scribble on buffers
            last = None
            plans = self._sphere_plans[nb] = (bwd, fwd)
        if last is not grid_index:
            if last is not None:
                src.reshape(self.batch, -1)[:, last] = 0
            flat_index = (np.arange(self.batch)[:, None] * self.size + grid_index).ravel()
            self._shared[2:] = [grid_index, flat_index]
        return src[:nb], dst[:nb], plans[0], plans[1], flat_index[:nb * grid_index.size]

    def prepare_potential(self, potential: np.ndarray) -> np.ndarray:
        """V(r)/N as complex numbers, the form :meth:`apply_prepared_potential` takes.

        The 1/N of the forward transform is folded into the potential, and a
        complex factor multiplies a complex field about twice as fast as a
        real one that numpy must cast on the fly.
        """
        return np.multiply(potential, 1.0 / self.size, dtype=complex)

    def apply_potential(self, coefficients: np.ndarray, grid_index: np.ndarray,
                        potential: np.ndarray) -> np.ndarray:
        """Basis coefficients of V(r) psi(r) for a block of basis functions.

        Parameters
        ----------
        coefficients : (nb, n_pw) complex
            Plane-wave coefficients on the sphere given by ``grid_index``.
        grid_index : (n_pw,) int
            Flat grid index of each plane wave (the same array object for every
            call at one k-point).
        potential : (*shape) float
            V(r) on the grid.

        Notes
        -----
        Scatter, backward transform, multiply and forward transform all happen
        in planned aligned buffers: no full-grid temporaries. Callers that apply
        one potential many times prepare it once with :meth:`prepare_potential`
        and call :meth:`apply_prepared_potential`.
        """
        return self.apply_prepared_potential(coefficients, grid_index,
                                             self.prepare_potential(potential))

    def apply_prepared_potential(self, coefficients: np.ndarray, grid_index: np.ndarray,
                                 prepared: np.ndarray) -> np.ndarray:
        """:meth:`apply_potential` for a potential from :meth:`prepare_potential`."""
        if not _HAVE_PYFFTW:
            grids = self._scatter(coefficients, grid_index)
            psi = self.to_real(grids) * (prepared * self.size)[None]
            return self.to_reciprocal(psi).reshape(len(coefficients), -1)[:, grid_index]
        nb = coefficients.shape[0]
        out = np.empty((nb, grid_index.size), dtype=complex)
        for start in range(0, nb, self.batch):
            stop = min(nb, start + self.batch)
            src, dst, bwd, fwd, flat = self._sphere_buffer(stop - start, grid_index)
            src.reshape(-1)[flat] = coefficients[start:stop].reshape(-1)
            t0 = time.perf_counter()
            bwd(normalise_idft=False)
            t1 = time.perf_counter()
            np.multiply(dst, prepared, out=dst)
            t2 = time.perf_counter()
            fwd()
            self.seconds += (t1 - t0) + (time.perf_counter() - t2)
            np.take(dst.reshape(-1), flat, out=out[start:stop].reshape(-1))
        self.n_transforms += 2 * nb
        return out

    def apply_prepared_meta(self, coefficients: np.ndarray, grid_index: np.ndarray,
                            prepared: np.ndarray, prepared_tau: np.ndarray,
                            kpg2: np.ndarray) -> np.ndarray:
        """Basis coefficients of ``V psi - 1/2 div(v_tau grad psi)`` for a block.

        Parameters
        ----------
        coefficients : (nb, n_pw) complex
        grid_index : (n_pw,) int
        prepared : from :meth:`prepare_potential` of ``V + (1/4) lap v_tau``
        prepared_tau : from :meth:`prepare_potential` of ``v_tau``
        kpg2 : (n_pw,) float, ``|k+G|^2``

        Notes
        -----
        With ``div(v grad psi) = [lap(v psi) + v lap psi - psi lap v] / 2`` the
        generalised Kohn-Sham term takes two transforms each way instead of the
        four each way of the three gradient components:

            out = F[(V + lap v/4) psi + (v/4) F^-1[|k+G|^2 c]] + |k+G|^2 F[v psi] / 4.

        Its matrix elements are ``(1/2) (k+G).(k+G') v(G-G')``, those of the gradient
        form, whenever the grid holds every difference G - G' of the sphere without
        folding (the density grid does).
        """
        quarter = 0.25 * kpg2
        if not _HAVE_PYFFTW:
            psi = self.to_real(self._scatter(coefficients, grid_index))
            lap = self.to_real(self._scatter(coefficients * kpg2, grid_index))
            size = self.size
            first = self.to_reciprocal(psi * (prepared * size) + lap * (prepared_tau * size / 4))
            second = self.to_reciprocal(psi * (prepared_tau * size))
            n = len(coefficients)
            return (first.reshape(n, -1)[:, grid_index]
                    + quarter * second.reshape(n, -1)[:, grid_index])
        nb = coefficients.shape[0]
        out = np.empty((nb, grid_index.size), dtype=complex)
        second = np.empty((min(nb, self.batch), grid_index.size), dtype=complex)
        tau4 = 0.25 * prepared_tau
        for start in range(0, nb, self.batch):
            stop = min(nb, start + self.batch)
            m = stop - start
            src, dst, bwd, fwd, flat = self._sphere_buffer(m, grid_index)
            lap, tau_psi, bwd_lap, fwd_tau = self._meta_plans(m)
            src.reshape(-1)[flat] = coefficients[start:stop].reshape(-1)
            t0 = time.perf_counter()
            bwd(normalise_idft=False)                       # dst = psi
            self.seconds += time.perf_counter() - t0
            src.reshape(-1)[flat] = (coefficients[start:stop] * kpg2).reshape(-1)
            t0 = time.perf_counter()
            bwd_lap(normalise_idft=False)                   # lap = F^-1[|k+G|^2 c]
            self.seconds += time.perf_counter() - t0
            np.multiply(dst, prepared_tau, out=tau_psi)
            np.multiply(dst, prepared, out=dst)
            np.multiply(lap, tau4, out=lap)
            dst += lap
            t0 = time.perf_counter()
            fwd()
            fwd_tau()
            self.seconds += time.perf_counter() - t0
            np.take(dst.reshape(-1), flat, out=out[start:stop].reshape(-1))
            np.take(tau_psi.reshape(-1), flat, out=second[:m].reshape(-1))
            second[:m] *= quarter
            out[start:stop] += second[:m]
        self.n_transforms += 4 * nb
        return out

    def _meta_plans(self, nb: int):
        """Scratch grids and plans of :meth:`apply_prepared_meta` for ``nb`` fields:
        ``(lap, tau_psi, backward src -> lap, forward tau_psi in place)``."""
        plans = getattr(self, "_meta_cache", None)
        if plans is None:
            plans = {"lap": pyfftw.empty_aligned((self.batch, *self.shape), dtype="complex128"),
                     "tau": pyfftw.empty_aligned((self.batch, *self.shape), dtype="complex128")}
            self._meta_cache = plans
        if nb not in plans:
            src = self._shared[0]
            lap, tau = plans["lap"][:nb], plans["tau"][:nb]
            bwd = pyfftw.FFTW(src[:nb], lap, axes=(1, 2, 3), direction="FFTW_BACKWARD",
                              flags=("FFTW_MEASURE",), threads=self.threads)
            fwd = pyfftw.FFTW(tau, tau, axes=(1, 2, 3), direction="FFTW_FORWARD",
                              flags=("FFTW_MEASURE", "FFTW_DESTROY_INPUT"), threads=self.threads)
            # planning may scribble on the shared input buffer; zero it all (the sphere
            # bookkeeping of _sphere_buffer stays valid: its entries are zero too)
            src[...] = 0
            plans[nb] = (bwd, fwd)
        bwd, fwd = plans[nb]
        return plans["lap"][:nb], plans["tau"][:nb], bwd, fwd

    def accumulate_density(self, coefficients: np.ndarray, grid_index: np.ndarray,
                           weights: np.ndarray, out: np.ndarray) -> None:
        """Add sum_b weights_b |psi_b(r)|^2 to ``out`` (shape ``shape``, float)."""
        if not _HAVE_PYFFTW:
            psi = self.to_real(self._scatter(coefficients, grid_index))
            out += np.einsum("b,bxyz->xyz", weights, (psi.conj() * psi).real)
            return
        nb = coefficients.shape[0]
        for start in range(0, nb, self.batch):
            stop = min(nb, start + self.batch)
            src, dst, bwd, _, flat = self._sphere_buffer(stop - start, grid_index)
            src.reshape(-1)[flat] = coefficients[start:stop].reshape(-1)
            t0 = time.perf_counter()
            bwd(normalise_idft=False)
            self.seconds += time.perf_counter() - t0
            # dst is scratch: square its real and imaginary parts in place, then
            # one matrix-vector product sums the weighted bands
            parts = dst.reshape(stop - start, -1).view(float)
            np.square(parts, out=parts)
            summed = weights[start:stop] @ parts
            out += (summed[0::2] + summed[1::2]).reshape(out.shape)
        self.n_transforms += nb

    def _scatter(self, coefficients, grid_index):
        nb = coefficients.shape[0]
        grids = np.zeros((nb, self.size), dtype=complex)
        grids[:, grid_index] = coefficients
        return grids.reshape(nb, *self.shape)

    def reset_counters(self) -> None:
        self.seconds = 0.0
        self.n_transforms = 0


def make_fft_grid(shape, batch: int = 8, threads: int | None = None) -> FFTGrid:
    """Build the FFT object for a grid; plans are made on first use of each batch size."""
    shape = tuple(int(n) for n in shape)
    return FFTGrid(shape=shape, batch=max(1, int(batch)),
                   threads=default_threads() if threads is None else int(threads))
