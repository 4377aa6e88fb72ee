"""Posterior inference: from observed line widths to the parameters of a wind model.

A fit file (:mod:`.spec`) names a base model, free keys with priors, the
observations and the sampler's settings; :func:`run_fit` samples the
posterior with emcee, the models of each batch of walkers solved by the
sweeps' worker code (:mod:`.likelihood`), checkpointed as the chain grows
and resumable (:mod:`.run`).  One job per module: plots > run > likelihood > spec.
"""

from .likelihood import DERIVED, LogPosterior
from .plots import corner_plot, predictive_plot
from .run import (
    JOURNAL_SUFFIX,
    TAU_STEPS,
    FitFile,
    FitRun,
    best_model,
    initial_walkers,
    posterior_table,
    read_fit,
    run_fit,
    summary_table,
)
from .spec import PRIORS, SAMPLER_KEYS, FitSpec, Prior, load_fit

__all__ = ["PRIORS", "SAMPLER_KEYS", "Prior", "FitSpec", "load_fit", "LogPosterior", "DERIVED",
           "FitRun", "FitFile", "run_fit", "read_fit", "posterior_table", "summary_table",
           "best_model", "initial_walkers", "corner_plot", "predictive_plot", "JOURNAL_SUFFIX",
           "TAU_STEPS"]
