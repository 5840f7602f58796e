"""The caution carried by every prediction fieldrate produces."""

from __future__ import annotations

__all__ = ["CAUTION_TEXT"]

CAUTION_TEXT = (
    "Screening estimate only. These figures describe abiotic hydrolysis alone, which is "
    "one loss process among several (biodegradation, photolysis, volatilisation, sorption "
    "and others also act in real water bodies). Extrapolation beyond the measured "
    "temperatures and pH values adds uncertainty that the intervals may not fully capture. "
    "Do not use these numbers on their own for registration, risk assessment or "
    "remediation decisions: follow the applicable test guidelines and local regulations "
    "and have the results reviewed by qualified professionals."
)
