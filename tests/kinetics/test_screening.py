"""Tests of kinetics.screening: persistence criteria and OECD TG 111 study checks."""

from __future__ import annotations

import pytest
from numpy.testing import assert_allclose

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.screening import (
    PERSISTENCE_CAUTION,
    PERSISTENCE_CRITERIA,
    STUDY_CLAIMS,
    StudyRun,
    check_study,
    screen_persistence,
)

DAY_S = 86400.0


def by_key(result):
    return {o.criterion.key: o for o in result.outcomes}


def test_criteria_thresholds_and_sources():
    crit = {c.key: c for c in PERSISTENCE_CRITERIA}
    # REACH Annex XIII (Regulation (EC) No 1907/2006 as amended by (EU) No 253/2011):
    # P: > 40 d fresh/estuarine water (1.1.1(b)), > 60 d marine water (1.1.1(a));
    # vP: > 60 d in marine, fresh or estuarine water (1.2.1(a)). Values checked against
    # published reproductions of the Annex text.
    assert crit["reach_P_fresh"].threshold_d == 40.0
    assert crit["reach_P_marine"].threshold_d == 60.0
    assert crit["reach_vP_water"].threshold_d == 60.0
    # 12 °C: the temperature at which ECHA Guidance on IR&CSA Chapter R.11 (PBT assessment)
    # asks for water half-lives (from memory, as kinetics.screening states)
    assert crit["reach_P_fresh"].assessment_temperature_K == 285.15
    # Stockholm Convention Annex D 1(b)(i): half-life in water greater than two months
    # (checked against the Convention text); two months = 2/12 of 365.25 d (project choice)
    assert_allclose(crit["stockholm_annex_d_water"].threshold_d, 60.875, rtol=1e-12)
    assert crit["stockholm_annex_d_water"].assessment_temperature_K is None
    for c in PERSISTENCE_CRITERIA:
        assert c.source and c.provision


def test_fresh_water_echa_r16_hand_computed():
    # 20 d at 20 °C -> 12 °C with ECHA R.16: 20 * exp(0.08 * 8) = 20 * 1.8964809 = 37.93 d
    res = screen_persistence(20 * DAY_S, 293.15, water="fresh", normalisation="echa_r16")
    o = by_key(res)
    assert set(o) == {"reach_P_fresh", "reach_vP_water", "stockholm_annex_d_water"}
    assert_allclose(o["reach_P_fresh"].half_life_compared_d, 37.929618, rtol=1e-7)
    assert not o["reach_P_fresh"].exceeds_threshold  # 37.9 d < 40 d
    assert not o["reach_vP_water"].exceeds_threshold
    # Stockholm: compared as given, 20 d at 20 °C < 60.9 d
    assert_allclose(o["stockholm_annex_d_water"].half_life_compared_d, 20.0, rtol=1e-12)
    assert o["stockholm_annex_d_water"].compared_at_temperature_K == 293.15
    assert res.caution == CAUTION_TEXT + " " + PERSISTENCE_CAUTION
    assert "biodegradation" in res.caution


def test_fresh_water_efsa_hand_computed_meets_p_not_vp():
    # 25 d at 20 °C -> 12 °C with EFSA (2008) Ea 65.4 kJ/mol: factor 2.122902 (hand computation
    # in test_normalisation.py) -> 53.07 d: above 40 d (P), below 60 d (vP)
    res = screen_persistence(25 * DAY_S, 293.15, normalisation="efsa_2008")
    o = by_key(res)
    assert_allclose(o["reach_P_fresh"].half_life_compared_d, 53.07254, rtol=1e-6)
    assert o["reach_P_fresh"].exceeds_threshold
    assert o["reach_P_fresh"].outcome == "hydrolysis slower than criterion"
    assert not o["reach_vP_water"].exceeds_threshold
    assert "biodegradation" in o["reach_P_fresh"].meaning
    assert "reach_P_fresh" in res.summary


def test_marine_water_hand_computed():
    # 30 d at 25 °C -> 12 °C with ECHA R.16: 30 * exp(0.08 * 13) = 30 * 2.829217 = 84.88 d
    res = screen_persistence(30 * DAY_S, 298.15, water="marine")
    o = by_key(res)
    assert set(o) == {"reach_P_marine", "reach_vP_water", "stockholm_annex_d_water"}
    assert_allclose(o["reach_P_marine"].half_life_compared_d, 84.87651, rtol=1e-6)
    assert o["reach_P_marine"].exceeds_threshold and o["reach_vP_water"].exceeds_threshold
    assert not o["stockholm_annex_d_water"].exceeds_threshold  # 30 d as given < 60.9 d
    assert any("9 °C" in n for n in res.notes)


def test_interval_spanning_a_threshold_is_reported():
    # (15, 28) d at 20 °C -> (28.45, 53.10) d at 12 °C with ECHA R.16: contains 40 d
    res = screen_persistence(20 * DAY_S, 293.15, dt50_interval_s=(15 * DAY_S, 28 * DAY_S))
    o = by_key(res)["reach_P_fresh"]
    assert o.outcome == "interval spans the criterion"
    assert_allclose((o.half_life_low_d, o.half_life_high_d), (28.44721, 53.10146), rtol=1e-6)
    assert res.interval()["reach_P_fresh"] == (o.half_life_low_d, o.half_life_high_d)
    assert "not conclusive" in res.summary


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"water": "river"}, "valid: fresh, estuarine, marine"),
        ({"normalisation": "q10"}, "valid: fitted, efsa_2008, echa_r16"),
        ({"normalisation": "fitted"}, "needs a surface fit"),
        ({"dt50_interval_s": (30 * DAY_S, 40 * DAY_S)}, "low <= dt50_s"),
    ],
)
def test_persistence_bad_input(kwargs, message):
    with pytest.raises(InputError, match=message):
        screen_persistence(20 * DAY_S, 293.15, **kwargs)


def tier1(losses, duration_d=5.0, temperature_K=323.15):
    return [StudyRun(temperature_K, ph, duration_d * DAY_S, loss, label=f"T1 pH {ph:g}")
            for ph, loss in zip((4.0, 7.0, 9.0), losses)]


def test_stable_conclusion_supported_when_tier1_below_10_percent():
    # OECD TG 111 Tier 1: < 10 % loss after 5 days at 50 °C at pH 4, 7, 9 -> stable
    res = check_study(tier1((2.0, 4.5, 9.9)))
    assert res.stable_conclusion_supported
    assert res.claims["hydrolytically_stable"].supported
    assert [p.status for p in res.preliminary] == ["stable"] * 3
    assert res.missing == ()
    assert res.caution == CAUTION_TEXT
    assert "OECD Test Guideline 111" in res.guideline["citation"]


def test_ten_percent_loss_is_unstable_and_names_tier2():
    res = check_study(tier1((2.0, 4.5, 10.0)))
    assert not res.stable_conclusion_supported
    assert res.unstable_pH == (9.0,)
    assert any("pH 9 is unstable" in m and "Tier 2" in m for m in res.missing)


def test_short_run_is_inconclusive_and_missing_named():
    runs = tier1((1.0, 2.0)) + [StudyRun(323.15, 9.0, 3 * DAY_S, 4.0, "short pH 9")]
    res = check_study(runs)
    status = {p.pH: p.status for p in res.preliminary}
    assert status[9.0] == "inconclusive"
    assert "a 5-day run at 50 °C at pH 9" in res.missing


def test_fast_loss_below_50C_implies_unstable():
    runs = tier1((1.0, 2.0)) + [StudyRun(298.15, 9.0, 2 * DAY_S, 60.0, "25 C pH 9")]
    res = check_study(runs)
    assert {p.pH: p.status for p in res.preliminary}[9.0] == "unstable"


def test_activation_energy_claim_needs_two_temperatures_at_unstable_pH():
    runs = tier1((1.0, 30.0, 95.0))
    res = check_study(runs, claims=("activation_energy", "rate_constants"))
    ea = res.claims["activation_energy"]
    assert not ea.supported
    assert any("Ea estimate at pH 9 needs >= 2 temperatures" in m for m in ea.missing)
    assert any("Ea estimate at pH 7 needs >= 2 temperatures" in m for m in ea.missing)
    more = runs + [
        StudyRun(308.15, 9.0, 30 * DAY_S, 70.0, "35 C pH 9"),
        StudyRun(293.15, 9.0, 30 * DAY_S, 35.0, "20 C pH 9"),
        StudyRun(308.15, 7.0, 10 * DAY_S, 25.0, "35 C pH 7"),
    ]
    res2 = check_study(more, claims=("activation_energy", "rate_constants"))
    assert res2.claims["activation_energy"].supported
    reasons = " ".join(res2.claims["activation_energy"].reasons)
    assert "pH 9: 3 temperature level(s) spanning 30.0 K" in reasons
    assert "pH 7: two temperatures" in reasons
    assert "pH 7: the temperatures span only 15.0 K" in reasons
    # the 35 °C pH 7 run stopped at 10 d with 25 % loss: before 90 % and before 30 d
    rates = " ".join(res2.claims["rate_constants"].reasons)
    assert "35 C pH 7" in rates and "before 30 days" in rates


def test_ph_rate_profile_claim():
    res = check_study(tier1((40.0, 30.0, 95.0)), claims=("ph_rate_profile",))
    assert res.claims["ph_rate_profile"].supported
    res = check_study(tier1((1.0, 30.0, 95.0)), claims=("ph_rate_profile",))
    assert not res.claims["ph_rate_profile"].supported


@pytest.mark.parametrize(
    "runs, claims, message",
    [
        ([], ("hydrolytically_stable",), "at least one run"),
        (tier1((1, 2, 3)), ("stable",), "valid: " + ", ".join(STUDY_CLAIMS)),
        ([{"temperature_K": 323.15, "pH": 7.0, "duration_s": 1.0, "percent_loss": 130.0}],
         ("hydrolytically_stable",), "percent_loss must be between -20 and 100"),
        ([{"temperature_K": 50.0, "pH": 7.0, "duration_s": 1.0, "percent_loss": 1.0}],
         ("hydrolytically_stable",), "looks like °C"),
        ([{"temperature_K": 323.15, "pH": 7.0, "duration_s": 1.0}],
         ("hydrolytically_stable",), "needs temperature_K, pH, duration_s and percent_loss"),
    ],
)
def test_study_bad_input(runs, claims, message):
    with pytest.raises(InputError, match=message):
        check_study(runs, claims=claims)
