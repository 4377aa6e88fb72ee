"""The log-posterior of a fit: prior + Gaussian likelihood of the observed widths.

The models of a batch of walkers are solved by the sweeps' worker code
(:func:`windsolve.sweep.run_batch`: Model A rows from the base model's
kernel vectors, widths in the same compiled call), in this process or split
over an executor (a local process pool or a dask cluster's).

ln L = -1/2 sum_i [ (p_i - o_i)^2 / s_i^2 + ln(2 pi s_i^2) ],
s_i^2 = sigma_i^2 + (f p_i)^2, with f the fit's fractional model uncertainty
(the ln s_i^2 term stays: s_i depends on the model).  A model without a
solution has zero likelihood (ln L = -inf); its status is counted.
"""

import math
from collections import Counter

import numpy as np

from ..sweep import run_batch

__all__ = ["DERIVED", "LogPosterior"]

# Derived quantities stored with every sample (blobs), cgs: besides the predictions.
DERIVED = {"mass_loss_rate": "g / s", "terminal_velocity": "cm / s", "sonic_radius": "cm",
           "photosphere_radius": "cm"}


class LogPosterior:
    """ln posterior of points of a fit's sampled space, batch by batch.

    Parameters
    ----------
    spec : FitSpec
        The validated fit.
    executor : concurrent.futures.Executor, optional
        Where batches run; None: in this process (a plain loop).
    chunks : int
        Tasks a batch is split into on ``executor`` (e.g. its workers).

    Attributes
    ----------
    statuses : collections.Counter
        Status of every model solved (``converged`` ones included), plus
        ``outside prior`` for points not solved.
    evaluations : int
        Models solved.
    """

    def __init__(self, spec, executor=None, chunks=1):
        self.spec = spec
        self.executor = executor
        self.chunks = max(1, int(chunks))
        self.statuses = Counter()
        self.evaluations = 0
        self.names = [f"{o.quantity}:{i}" for i, o in enumerate(spec.observations)]
        self.values = np.array([o.value for o in spec.observations])
        self.sigmas = np.array([o.uncertainty for o in spec.observations])
        self.quantities = [o.quantity for o in spec.observations]
        self.blob_names = list(DERIVED) + [q for q in ("fwhm", "hwzi", "edge_velocity")
                                           if spec.lines is not None]

    def _records(self, items):
        if self.executor is None or self.chunks == 1 or len(items) < 2:
            return run_batch(self.spec.base, items, False, self.spec.lines)
        n = -(-len(items) // self.chunks)
        futures = [self.executor.submit(run_batch, self.spec.base, items[i:i + n], False,
                                        self.spec.lines) for i in range(0, len(items), n)]
        out = []
        for fut in futures:
            out.extend(fut.result())
        return out

    def log_likelihood(self, records):
        """ln L and the blobs (cgs) of solved records.

        Parameters
        ----------
        records : list of dict
            Sweep records (:func:`windsolve.sweep.run_batch`), values in cgs.

        Returns
        -------
        lnl : numpy.ndarray
            ln likelihood per record (-inf: no solution, or no prediction).
        blobs : numpy.ndarray
            (records, blob names) derived quantities and widths [cgs].
        """
        f = self.spec.model_uncertainty
        lnl = np.full(len(records), -math.inf)
        blobs = np.full((len(records), len(self.blob_names)), math.nan)
        for i, record in enumerate(records):
            self.statuses[record.get("status") or "error"] += 1
            blobs[i] = [record.get(k, math.nan) for k in self.blob_names]
            if not record.get("converged"):
                continue
            pred = np.array([record.get(q, math.nan) for q in self.quantities])
            if not np.all(np.isfinite(pred)):
                self.statuses["no prediction"] += 1
                continue
            s2 = self.sigmas ** 2 + (f * pred) ** 2
            lnl[i] = -0.5 * float(np.sum((pred - self.values) ** 2 / s2
                                         + np.log(2 * math.pi * s2)))
        return lnl, blobs

    def __call__(self, theta):
        """Vectorised for emcee: (n, ndim) points -> [(ln posterior, *blobs)] per point."""
        theta = np.atleast_2d(theta)
        lnp = self.spec.log_prior(theta)
        out_lnp = np.full(len(theta), -math.inf)
        out_blobs = np.full((len(theta), len(self.blob_names)), math.nan)
        inside = np.flatnonzero(np.isfinite(lnp))
        self.statuses["outside prior"] += len(theta) - len(inside)
        if len(inside):
            items = [(int(i), self.spec.changes(theta[i])) for i in inside]
            records = self._records(items)
            self.evaluations += len(records)
            lnl, blobs = self.log_likelihood(records)
            out_lnp[inside] = lnp[inside] + lnl
            out_blobs[inside] = blobs
        return [(float(out_lnp[i]), *out_blobs[i]) for i in range(len(theta))]
