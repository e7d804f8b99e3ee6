"""Development/validation split: does the preferred (family, K) hold in fresh participants?

The included participants are split at random (seeded) into a development and a
validation sample. Every (family, K) is refitted on the validation sample alone, on its
own z-scale, and its BIC-preferred model is compared with the development one; the
development-preferred model is also scored on the validation sample (common practice
for checking a cluster solution out of sample; see Hennig 2007, *Comput Stat Data Anal*
52:258-271, for why a solution found once needs such a check).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sleepfuse.model.errors import ConfigError
from sleepfuse.explore.columns import PreparedData
from sleepfuse.explore.mixtures import DEFAULT_FAMILIES, MixtureFit, fit_mixtures, preferred_fit


@dataclass
class HoldoutResult:
    """Whether the development sample's preferred (family, K) is found again in the validation sample."""

    fraction: float
    seed: int
    n_development: int
    n_validation: int
    development: tuple[str, int] | None
    validation: tuple[str, int] | None
    validation_fits: list[MixtureFit]
    validation_loglik: float          # development-preferred model on the validation sample (dev z-scale)

    @property
    def holds(self) -> bool:
        return self.development is not None and self.development == self.validation

    def summary(self, block: str) -> dict:
        dev, val = self.development or (None, None), self.validation or (None, None)
        return {
            "block": block, "fraction": self.fraction, "seed": self.seed,
            "n_development": self.n_development, "n_validation": self.n_validation,
            "development_family": dev[0], "development_K": dev[1],
            "validation_family": val[0], "validation_K": val[1],
            "family_holds": dev[0] is not None and dev[0] == val[0],
            "K_holds": dev[1] is not None and dev[1] == val[1], "holds": self.holds,
            "validation_loglik_of_development_model": self.validation_loglik,
            "validation_loglik_per_participant": (self.validation_loglik / self.n_validation
                                                  if self.n_validation else np.nan),
        }


def split_participants(n: int, fraction: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Sorted row indices (development, validation); round(fraction·n) participants go to validation."""
    if not 0.0 < fraction < 1.0:
        raise ConfigError("--holdout", fraction, "a fraction strictly between 0 and 1, e.g. 0.3")
    n_val = int(round(fraction * n))
    if n_val < 2 or n - n_val < 2:
        raise ConfigError("--holdout", fraction, f"a fraction leaving at least 2 participants in each sample (n = {n})")
    order = np.random.default_rng([int(seed), 7919]).permutation(n)
    return np.sort(order[n_val:]), np.sort(order[:n_val])


def run_holdout(
    development: PreparedData,
    validation: PreparedData,
    development_best: MixtureFit | None,
    fraction: float,
    *,
    families: tuple[str, ...] = DEFAULT_FAMILIES,
    kmax: int = 5,
    seed: int = 0,
    **fit_options,
) -> HoldoutResult:
    """Refit every (family, K) on the validation sample and compare its preferred model with the development one."""
    val_fits = fit_mixtures(validation.z, families, kmax, seed=seed, **fit_options)
    val_best = preferred_fit(val_fits)
    loglik = (development_best.log_likelihood(development.standardise(validation.raw))
              if development_best is not None else float("nan"))
    return HoldoutResult(
        fraction=float(fraction), seed=int(seed),
        n_development=len(development.participants), n_validation=len(validation.participants),
        development=(development_best.family, development_best.n_components) if development_best else None,
        validation=(val_best.family, val_best.n_components) if val_best else None,
        validation_fits=val_fits, validation_loglik=loglik,
    )
