"""Absolute molar mass and structure from more detectors (light scattering, viscometry,
UV/RI composition) and the band-broadening correction.

Pure numerics on numpy arrays; every analysis returns a frozen dataclass with
``summary()`` (plain JSON-safe types) and, where it has slices, ``table()``. Nothing here
writes files or prints. The methods, conventions and check values are described in
``docs/detectors.md``.

Typical use::

    setup = DetectorSetup.from_mapping(method_toml["detectors"], flow_rate=1.0)
    cal = calibrate_setup(standard_traces, setup, NarrowStandard(Mw=..., dispersity=...,
                          B=..., injected_mass=...))
    setup = cal.apply(setup)
    ls = analyse_light_scattering(sample_traces, setup, limits=(18.0, 26.0))
    ls.averages["Mn"], ls.Mw_areas.value
"""

from __future__ import annotations

from .branching import Branching, branch_points, branching, contraction_factor
from .broadening import (
    BroadeningCorrection,
    CLDBias,
    Deconvolution,
    Spreading,
    broadening_factors,
    cld_broadening_bias,
    correct_averages,
    deconvolve,
    spreading_from_dispersity,
)
from .composition import (
    Composition,
    analyse_composition,
    composition,
    copolymer_dn_dc,
    copolymer_log_M,
)
from .instrument import (
    ConcentrationDetector,
    Copolymer,
    Detector,
    DetectorSetup,
    LightScatteringDetector,
    Viscometer,
)
from .light_scattering import (
    ConformationFit,
    LightScatteringOptions,
    LightScatteringResult,
    analyse_light_scattering,
)
from .narrow_standard import (
    DetectorCalibration,
    NarrowStandard,
    PeakFit,
    SetupCalibration,
    calibrate_setup,
    fit_peak,
    polydispersity_lead,
)
from .scattering import (
    AngularFit,
    coil_scattering_function,
    fit_angles,
    flory_fox_rg,
    molar_mass_with_viscometer,
    optical_constant,
    rg_from_dissymmetry,
    scattering_vector,
    viscometric_radius,
)
from .traces import DetectorTraces, align, concentration
from .viscometry import (
    MarkHouwinkFit,
    ViscometryOptions,
    ViscometryResult,
    analyse_viscometry,
    bridge_pressure,
    fit_mark_houwink,
    hydrodynamic_volume,
    intrinsic_viscosity,
    mark_houwink_viscosity,
    number_average_universal,
    specific_viscosity,
    universal_molar_mass,
    viscosity_average_M,
    weight_average_intrinsic_viscosity,
)

__all__ = [
    "AngularFit", "Branching", "BroadeningCorrection", "CLDBias", "Composition", "ConcentrationDetector",
    "ConformationFit", "Copolymer", "Deconvolution", "Detector", "DetectorCalibration", "DetectorSetup",
    "DetectorTraces", "LightScatteringDetector", "LightScatteringOptions", "LightScatteringResult",
    "MarkHouwinkFit", "NarrowStandard", "PeakFit", "SetupCalibration", "Spreading", "Viscometer",
    "ViscometryOptions", "ViscometryResult", "align", "analyse_composition", "analyse_light_scattering", "analyse_viscometry",
    "branch_points", "branching", "bridge_pressure", "broadening_factors", "calibrate_setup",
    "cld_broadening_bias", "coil_scattering_function", "composition", "concentration", "contraction_factor",
    "copolymer_dn_dc", "copolymer_log_M", "correct_averages", "deconvolve", "fit_angles", "fit_mark_houwink",
    "fit_peak", "flory_fox_rg", "hydrodynamic_volume", "intrinsic_viscosity", "mark_houwink_viscosity",
    "molar_mass_with_viscometer", "number_average_universal", "optical_constant", "polydispersity_lead",
    "rg_from_dissymmetry", "scattering_vector", "specific_viscosity", "spreading_from_dispersity",
    "universal_molar_mass", "viscometric_radius", "viscosity_average_M", "weight_average_intrinsic_viscosity",
]
