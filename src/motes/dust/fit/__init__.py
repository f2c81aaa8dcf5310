"""Nested-sampling fits of disk colours and the evidence ranking of compositions.

- :mod:`~motes.dust.fit.spec` — the fit description (models, priors, sampler);
- :mod:`~motes.dust.fit.priors` — priors and the parameter space of one model;
- :mod:`~motes.dust.fit.problem` — forward model + data + priors as a likelihood
  (the noise model itself is :mod:`motes.dust.likelihood`);
- :mod:`~motes.dust.fit.scale_check` — does the ``[scale]`` prior hold the scale the data need;
- :mod:`~motes.dust.fit.sampler` — dynesty runs, checkpoints and pools;
- :mod:`~motes.dust.fit.evidence` — ranking by ln Z and the material verdicts;
- :mod:`~motes.dust.fit.results` — result objects and their files;
- :mod:`~motes.dust.fit.run` — :func:`run_fit`, the whole job, resumable;
- :mod:`~motes.dust.fit.thermal_spec`, :mod:`~motes.dust.fit.joint`, :mod:`~motes.dust.fit.joint_run` —
  the joint fit of scattered light and a thermal SED (``[data] thermal``).
"""

from __future__ import annotations

from .evidence import VERDICT_RULE, ModelEvidence, Verdict
from .priors import ParameterSpace, Prior
from .results import FitResult, ModelResult
from .run import FitRunSettings, run_fit
from .spec import FitSpec, ModelSpec, SamplerSettings, parse_fit_description, read_fit_description

__all__ = [
    "FitResult",
    "FitRunSettings",
    "FitSpec",
    "ModelEvidence",
    "ModelResult",
    "ModelSpec",
    "ParameterSpace",
    "Prior",
    "SamplerSettings",
    "VERDICT_RULE",
    "Verdict",
    "parse_fit_description",
    "read_fit_description",
    "run_fit",
]
