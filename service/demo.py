"""The invented demo scenario loaded by ``fieldrate serve --demo``.

Everything here is invented: the substances "Veltrazine (invented)" and "Orbitamide
(invented)", the laboratory and the numbers. The concentrations were generated from an
assumed pH-temperature rate surface with 2 % multiplicative noise and rounded the way a
laboratory reports them; one Orbitamide run (pH 9, 60 °C) was generated as a biphasic
decline and is marked for a DFOP fit. They exercise the service, they describe no real
chemical.

Orbitamide (invented) was generated from this invented three-pathway Arrhenius set
(reference temperature 25 °C, rate law :math:`k = k_A a_{H^+} + k_N + k_B a_{OH^-}` with
the water chemistry of :func:`kinetics.water.hydronium_hydroxide_molar` at an ionic
strength of 0.01 mol/L):

============  =======================  ===========
pathway       k at 25 °C               Ea [kJ/mol]
============  =======================  ===========
acid          0.052 L/(mol s)          70
neutral       2.0e-8 1/s               90
base          1.0e-2 L/(mol s)         60
============  =======================  ===========

Each run starts at 25 µmol/L and is sampled at 0, 4, 10, 20, 35, 50, 70 and 100 % of
min(30 d, ln 10 / k). The pH 9 / 60 °C run is a DFOP decline (65 % of the substance at
k1 = 2.59e-5 1/s, the rest at k1 / 12) whose DT50 equals ln 2 / k of the set, sampled
over 14 half-lives; noise: 2 % (normal, seed 20260302).

:func:`demo_payloads` gives the scenario as API request bodies (the round-trip test posts
them through the HTTP API); :func:`load_demo` stores them directly, once.
"""

from __future__ import annotations

from typing import Any

from service.config import Settings

__all__ = ["INVENTED_NOTE", "DEMO_LABORATORY", "DEMO_SUBSTANCES", "demo_payloads", "load_demo"]

INVENTED_NOTE = "Invented demo data: not a real substance, laboratory or measurement."
DEMO_LABORATORY = "Northfield Hydrolysis Laboratory (invented)"

_TIMES_30D = [0.0, 1.2, 3.0, 6.0, 10.5, 15.0, 21.0, 30.0]

# (temperature_C, pH, time [d], concentration) per substance
_VELTRAZINE_SERIES_MG_L = [
    (20, 4, _TIMES_30D, [9.991, 9.934, 9.972, 8.994, 9.098, 8.489, 7.799, 6.85]),
    (20, 7, _TIMES_30D, [9.895, 9.791, 9.765, 9.902, 10.042, 9.558, 9.407, 9.502]),
    (20, 9, _TIMES_30D, [9.823, 9.495, 9.023, 8.403, 7.063, 6.09, 4.984, 3.741]),
    (40, 4, [0.0, 1.03, 2.57, 5.14, 9.0, 12.86, 18.0, 25.72],
     [10.228, 9.534, 8.519, 6.906, 5.523, 4.193, 2.994, 1.825]),
    (40, 7, _TIMES_30D, [9.472, 9.689, 9.735, 9.193, 8.755, 8.222, 7.971, 6.882]),
    (40, 9, [0.0, 0.117, 0.293, 0.586, 1.026, 1.466, 2.052, 2.931],
     [9.953, 9.291, 8.507, 7.285, 5.442, 4.307, 2.98, 1.698]),
    (60, 4, [0.0, 0.22, 0.54, 1.09, 1.9, 2.71, 3.8, 5.43],
     [10.238, 8.923, 8.432, 7.254, 5.628, 4.246, 2.873, 1.806]),
    (60, 7, [0.0, 0.6, 1.5, 3.0, 5.24, 7.49, 10.48, 14.98],
     [9.966, 9.171, 8.36, 6.91, 5.398, 4.151, 2.979, 1.758]),
    (60, 9, [0.0, 0.04, 0.1, 0.2, 0.35, 0.5, 0.7, 1.0],
     [10.099, 7.768, 4.944, 2.417, 0.941, 0.325, 0.084, 0.01]),
]

_ORBITAMIDE_SERIES_UMOL_L = [
    (20, 4, [0.0, 0.299, 0.748, 1.5, 2.62, 3.74, 5.24, 7.48],
     [24.6, 22.64, 20.22, 15.83, 10.58, 8.15, 4.96, 2.51]),
    (20, 7, [0.0, 1.2, 3.0, 6.0, 10.5, 15.0, 21.0, 30.0],
     [26.03, 25.17, 24.86, 24.29, 25.16, 24.44, 24.55, 24.14]),
    (20, 9, [0.0, 1.2, 3.0, 6.0, 10.5, 15.0, 21.0, 30.0],
     [24.44, 24.99, 24.72, 23.93, 23.19, 23.26, 22.05, 21.02]),
    (40, 4, [0.0, 0.0476, 0.119, 0.238, 0.416, 0.595, 0.833, 1.19],
     [24.91, 22.49, 19.75, 16.25, 11.28, 7.93, 4.97, 2.54]),
    (40, 7, [0.0, 1.2, 3.0, 6.0, 10.5, 15.0, 21.0, 30.0],
     [25.14, 23.97, 23.94, 23.21, 22.7, 21.13, 19.3, 17.13]),
    (40, 9, [0.0, 0.932, 2.33, 4.66, 8.15, 11.7, 16.3, 23.3],
     [24.48, 22.63, 20.13, 15.67, 11.51, 7.95, 5.16, 2.54]),
    (60, 4, [0.0, 0.00952, 0.0238, 0.0476, 0.0833, 0.119, 0.167, 0.238],
     [25.07, 22.1, 19.57, 16.06, 11.29, 8.04, 4.91, 2.47]),
    (60, 7, [0.0, 0.924, 2.31, 4.62, 8.09, 11.6, 16.2, 23.1],
     [25.27, 23.2, 19.49, 16.4, 11.01, 7.96, 4.89, 2.54]),
    (60, 9, [0.0, 0.094, 0.188, 0.375, 0.751, 1.126, 1.877, 2.627, 3.754, 5.255, 7.882],
     [24.39, 21.97, 19.69, 15.11, 10.57, 8.29, 6.47, 5.53, 4.25, 3.36, 2.0]),
]

_BUFFERS = {4: "acetate 0.01 M", 7: "phosphate 0.01 M", 9: "borate 0.01 M"}

DEMO_SUBSTANCES: list[dict[str, Any]] = [
    {
        "name": "Veltrazine (invented)",
        "substance_class": "carboxylic ester (invented)",
        "notes": INVENTED_NOTE + " Base-catalysed hydrolysis dominates above pH 8.",
    },
    {
        "name": "Orbitamide (invented)",
        "substance_class": "activated amide (invented)",
        "notes": INVENTED_NOTE + " Acid-catalysed hydrolysis dominates at pH 4, the neutral "
        "reaction at pH 7 and base catalysis at pH 9; the pH 9 / 60 °C run declines "
        "biphasically.",
    },
]


def _study(substance_index: int) -> dict[str, Any]:
    return {
        "laboratory": DEMO_LABORATORY,
        "test_guideline": "hydrolysis as a function of pH, tiered design (invented study)",
        "glp": False,
        "reference": f"Invented report NHL-2026-{substance_index + 17:03d} (invented)",
        "start_date": "2026-03-02",
        "end_date": "2026-04-10",
        "notes": INVENTED_NOTE,
    }


def _series_run(t_C: int, pH: int, times: list[float], conc: list[float], unit: str) -> dict[str, Any]:
    series: dict[str, Any] = {
        "time": times,
        "time_unit": "d",
        "concentration": conc,
        "concentration_unit": unit,
    }
    return {
        "temperature_C": float(t_C),
        "pH": float(pH),
        "buffer": _BUFFERS[pH],
        "ionic_strength_M": 0.01,
        "cosolvent_percent_v_v": 0.5,
        "sterile": True,
        "dark": True,
        "replicate_label": "A",
        "notes": INVENTED_NOTE,
        "series": series,
    }


def demo_payloads() -> list[dict[str, Any]]:
    """The scenario as request bodies: per substance its body, its study body and its runs.

    Returns
    -------
    list of dict
        ``{"substance": {...}, "study": {...}, "runs": [{...}, ...]}``; the study body lacks
        ``substance_id`` and the runs lack ``study_id`` (filled in once those exist).
    """
    veltrazine_runs = []
    for t_C, pH, times, conc in _VELTRAZINE_SERIES_MG_L:
        run = _series_run(t_C, pH, times, conc, "mg/L")
        if (t_C, pH) == (60, 9):
            # last sample below the limit of quantification (invented)
            run["series"]["loq"] = 0.02
            run["series"]["below_loq"] = [False] * (len(times) - 1) + [True]
        veltrazine_runs.append(run)
    orbitamide_runs = []
    for t_C, pH, times, conc in _ORBITAMIDE_SERIES_UMOL_L:
        run = _series_run(t_C, pH, times, conc, "umol/L")
        if (t_C, pH) == (60, 9):
            run["series_model"] = "DFOP"
            run["notes"] = INVENTED_NOTE + " Biphasic decline: fitted with DFOP."
        orbitamide_runs.append(run)
    return [
        {"substance": dict(DEMO_SUBSTANCES[0]), "study": _study(0), "runs": veltrazine_runs},
        {"substance": dict(DEMO_SUBSTANCES[1]), "study": _study(1), "runs": orbitamide_runs},
    ]


def load_demo(settings: Settings) -> dict[str, Any]:
    """Store the demo scenario in the configured database unless it is already there.

    Returns
    -------
    dict
        ``{"created": bool, "substances": int, "runs": int}``.
    """
    from sqlalchemy import select

    from service import crud
    from service.db import make_engine, make_session_factory, session_scope
    from service.models import Substance
    from service.schemas import RunCreate, StudyCreate, SubstanceCreate

    actor = "demo loader"
    engine = make_engine(settings.database_url, busy_timeout_ms=settings.sqlite_busy_timeout_ms)
    try:
        factory = make_session_factory(engine)
        payloads = demo_payloads()
        n_runs = sum(len(p["runs"]) for p in payloads)
        with session_scope(factory, write=True) as session:
            names = [p["substance"]["name"] for p in payloads]
            present = session.scalars(select(Substance.name).where(Substance.name.in_(names))).all()
            if present:
                return {"created": False, "substances": len(payloads), "runs": n_runs}
            for p in payloads:
                substance = crud.create_substance(
                    session, data=SubstanceCreate(**p["substance"]), actor=actor
                )
                study = crud.create_study(
                    session, data=StudyCreate(substance_id=substance.id, **p["study"]), actor=actor
                )
                runs = [RunCreate(study_id=study.id, **r) for r in p["runs"]]
                crud.create_runs_batch(
                    session, runs=runs, actor=actor, max_points=settings.max_points_per_series
                )
        return {"created": True, "substances": len(payloads), "runs": n_runs}
    finally:
        engine.dispose()
