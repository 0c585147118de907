"""Recipe-based prediction, the 1/DPn budget, and a ranked diagnosis of low molar mass.

Public API
----------
load_recipe(path) -> Recipe
predict(recipe) -> Prediction
resolve_parameters(recipe) -> KineticParameters
evaluate(parameters, **perturbations) -> KineticState
diagnose(recipe, measured=None, reference=None, *, distribution=None) -> Diagnosis
diagnose_recipe(recipe_path, *, measured_path=None, sample_id=None,
                distribution_paths=()) -> Diagnosis
measured_from_results(path, *, sample_id=None) -> (Measured, checks)
model_uncertainty(recipe, parameters, ref, ...) -> ModelUncertainty
rate_from_conversion(time_min, conversion, conc_M) -> RateFromConversion
SAFETY_NOTE

See ``templates/recipe.toml`` (or ``templates/recipe.csv``) for the recipe,
:mod:`gpctools.kinetics.predict` for the formulas, :mod:`gpctools.kinetics.uncertainty`
for the model's uncertainty, :mod:`gpctools.kinetics.evidence` for the distribution's
shape, :mod:`gpctools.kinetics.impurity` for impurity levels and
:mod:`gpctools.kinetics.diagnose` for how causes are scored. Nothing
here writes files or formats text: :func:`gpctools.report.write_diagnosis` writes a
diagnosis, :mod:`gpctools.report.markdown` turns predictions and diagnoses into markdown.
"""

from __future__ import annotations

from gpctools.kinetics.diagnose import (
    Cause,
    CheckLine,
    Diagnosis,
    ExcessEstimate,
    ImpurityEstimate,
    RateFromConversion,
    diagnose,
    rate_from_conversion,
)
from gpctools.kinetics.evidence import DistributionCurve, MeasuredDistribution
from gpctools.kinetics.inputs import diagnose_recipe, measured_from_results
from gpctools.kinetics.predict import (
    InhibitorTerm,
    KineticParameters,
    KineticState,
    KineticsWarning,
    Prediction,
    dispersity_instantaneous,
    evaluate,
    predict,
    resolve_parameters,
)
from gpctools.kinetics.recipe import (
    Checks,
    Component,
    InhibitorSpec,
    Measured,
    Recipe,
    load_recipe,
)
from gpctools.kinetics.safety import RUNAWAY_NOTE, SAFETY_NOTE
from gpctools.kinetics.uncertainty import ModelUncertainty, model_uncertainty

__all__ = [
    "Cause",
    "CheckLine",
    "Checks",
    "Component",
    "Diagnosis",
    "DistributionCurve",
    "ExcessEstimate",
    "ImpurityEstimate",
    "InhibitorSpec",
    "InhibitorTerm",
    "KineticParameters",
    "KineticState",
    "KineticsWarning",
    "Measured",
    "MeasuredDistribution",
    "ModelUncertainty",
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
    "model_uncertainty",
    "predict",
    "rate_from_conversion",
    "resolve_parameters",
]
