"""The invented demo scenario loaded by ``fieldrate serve --demo``.

Everything here is invented: the substances "Veltrazine (invented)" and "Orbitamide
(invented)", the laboratory and the numbers. The concentrations were generated from an
assumed pH-temperature rate surface with 2 % multiplicative noise and rounded the way a
laboratory reports them; one Orbitamide run (pH 9, 60 °C) was generated as a biphasic
decline and is marked for a DFOP fit. They exercise the service, they describe no real
chemical.

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
    (20, 4, [0.0, 0.24, 0.61, 1.21, 2.12, 3.03, 4.24, 6.06],
     [25.39, 23.41, 20.96, 18.26, 13.59, 10.36, 7.46, 4.46]),
    (20, 7, _TIMES_30D, [25.46, 26.45, 25.08, 25.24, 24.36, 24.31, 24.85, 24.18]),
    (20, 9, _TIMES_30D, [25.42, 25.06, 25.24, 24.78, 25.41, 24.6, 24.05, 24.32]),
    (40, 4, [0.0, 0.05, 0.126, 0.251, 0.44, 0.628, 0.88, 1.256],
     [25.23, 23.0, 20.55, 17.58, 13.43, 10.29, 7.54, 4.5]),
    (40, 7, _TIMES_30D, [25.01, 25.4, 24.41, 25.14, 24.1, 24.25, 22.54, 23.05]),
    (40, 9, _TIMES_30D, [24.7, 24.35, 23.54, 23.47, 20.39, 19.85, 18.76, 16.2]),
    (60, 4, [0.0, 0.04, 0.1, 0.2, 0.35, 0.5, 0.7, 1.0],
     [25.05, 19.65, 14.75, 8.15, 3.57, 1.59, 0.53, 0.1]),
    (60, 7, _TIMES_30D, [26.09, 23.85, 23.58, 21.64, 20.35, 17.66, 16.24, 12.51]),
    (60, 9, [0.0, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0, 7.0, 10.0, 14.0, 21.0],
     [24.64, 22.79, 19.44, 16.49, 12.94, 10.88, 8.97, 8.86, 7.76, 7.45, 6.13]),
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
        "notes": INVENTED_NOTE + " Acid-catalysed hydrolysis dominates; the pH 9 / 60 °C "
        "run declines biphasically.",
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
