"""Tests of kinetics.hints: substance-class plausibility hints."""

from __future__ import annotations

import math

import pytest

from kinetics.errors import InputError
from kinetics.hints import CLASS_PROFILES, SUBSTANCE_CLASSES, class_hints


@pytest.mark.parametrize("ea", [15e3, 29.9e3, 151e3, 250e3])
def test_implausible_activation_energies_are_flagged(ea):
    # bounds 30-150 kJ/mol: project choice (common practice, no source)
    rep = class_hints(substance_class="other", ea_J_per_mol={"neutral": ea})
    assert rep.implausible
    assert rep.hints[0].level == "implausible" and f"{ea / 1e3:.1f} kJ/mol" in rep.hints[0].message


def test_typical_ester_base_ea_passes_and_unusual_one_is_noted():
    # carboxylic ester base hydrolysis ~35-70 kJ/mol (from memory)
    ok = class_hints(substance_class="carboxylic_ester", ea_J_per_mol={"base": 48e3})
    assert not ok.implausible and ok.hints[0].level == "info"
    odd = class_hints(substance_class="carboxylic_ester", ea_J_per_mol={"base": 120e3})
    assert odd.hints[0].level == "unusual" and "from memory" in odd.hints[0].message


def test_pathway_set_hints():
    rep = class_hints(substance_class="alkyl_halide", pathways=("acid", "neutral"))
    assert any(h.level == "unusual" and h.pathway == "acid" for h in rep.hints)
    rep = class_hints(substance_class="carboxylic_ester", pathways=("neutral",))
    assert any(h.pathway == "base" and "not in the fitted model" in h.message for h in rep.hints)


def test_every_class_has_a_source():
    assert set(CLASS_PROFILES) == set(SUBSTANCE_CLASSES)
    for prof in CLASS_PROFILES.values():
        assert prof.source
        for lo, hi in prof.ea_ranges_J_per_mol.values():
            assert 30e3 <= lo < hi <= 150e3


def test_real_surface_fit_with_prior_pathway_is_not_judged():
    from kinetics.surface import RateMeasurement, fit_surface

    # invented runs: pH 7 only, one temperature -> neutral Ea from the default prior
    runs = [RateMeasurement(temperature_K=298.15, pH=7.0, k_per_s=1e-7 * f, se_ln_k=0.05,
                            label="invented") for f in (0.95, 1.0, 1.05)]
    fit = fit_surface(runs)
    rep = class_hints(fit, substance_class="carbamate")
    assert "neutral" in rep.ea_J_per_mol
    assert any("comes from a prior" in h.message for h in rep.hints)
    assert not rep.implausible


def test_real_surface_fit_with_fitted_ea():
    from kinetics.surface import RateMeasurement, fit_surface

    # invented neutral runs with Ea = 15 kJ/mol at 20, 35, 50 °C: implausibly low
    runs = [RateMeasurement(temperature_K=t, pH=7.0,
                            k_per_s=1e-6 * math.exp(-15e3 / 8.314462618 * (1 / t - 1 / 298.15)),
                            se_ln_k=0.02, label="invented")
            for t in (293.15, 308.15, 323.15) for _ in range(2)]
    rep = class_hints(fit_surface(runs), substance_class="phosphate_ester")
    assert rep.implausible
    assert abs(rep.ea_J_per_mol["neutral"] - 15e3) < 1e3


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"substance_class": "ketone", "pathways": ("base",)}, "valid: carboxylic_ester"),
        ({"ea_J_per_mol": {"radical": 5e4}}, "valid: acid, neutral, base"),
        ({}, "give a surface fit"),
    ],
)
def test_bad_input(kwargs, message):
    with pytest.raises(InputError, match=message):
        class_hints(**kwargs)
