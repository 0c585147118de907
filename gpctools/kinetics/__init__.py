"""Recipe-based prediction, the 1/DPn budget, and a ranked diagnosis of low molar mass.

Public API
----------
load_recipe(path) -> Recipe
predict(recipe) -> Prediction
resolve_parameters(recipe) -> KineticParameters
evaluate(parameters, **perturbations) -> KineticState
diagnose(recipe, measured=None, reference=None) -> Diagnosis
diagnose_recipe(recipe_path, *, measured_path=None, sample_id=None) -> Diagnosis
rate_from_conversion(time_min, conversion, conc_M) -> RateFromConversion
SAFETY_NOTE

See ``templates/recipe.toml`` for the recipe file, :mod:`gpctools.kinetics.predict` for
the formulas and :mod:`gpctools.kinetics.diagnose` for how causes are scored. Nothing
here writes files or formats text: :func:`gpctools.report.write_diagnosis` writes a
diagnosis, :mod:`gpctools.report.markdown` turns predictions and diagnoses into markdown.
"""

from __future__ import annotations

from gpctools.kinetics.diagnose import (
    Cause,
    CheckLine,
    Diagnosis,
    ImpurityEstimate,
    RateFromConversion,
    diagnose,
    diagnose_recipe,
    measured_from_results,
    rate_from_conversion,
)
from gpctools.kinetics.predict import (
    KineticParameters,
    KineticState,
    KineticsWarning,
    Prediction,
    dispersity_instantaneous,
    evaluate,
    predict,
    resolve_parameters,
)
from gpctools.kinetics.recipe import Checks, Component, Measured, Recipe, load_recipe
from gpctools.kinetics.safety import RUNAWAY_NOTE, SAFETY_NOTE

__all__ = [
    "Cause",
    "CheckLine",
    "Checks",
    "Component",
    "Diagnosis",
    "ImpurityEstimate",
    "KineticParameters",
    "KineticState",
    "KineticsWarning",
    "Measured",
    "Prediction",
    "RateFromConversion",
    "Recipe",
    "RUNAWAY_NOTE",
    "SAFETY_NOTE",
    "diagnose",
    "diagnose_recipe",
    "dispersity_instantaneous",
    "evaluate",
    "load_recipe",
    "measured_from_results",
    "predict",
    "rate_from_conversion",
    "resolve_parameters",
]
