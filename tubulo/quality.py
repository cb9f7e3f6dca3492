"""Data-quality checks on measured values (blood gas consistency, ...); messages, never exceptions."""

from __future__ import annotations

import math

from .paths import read_knowledge_yaml

__all__ = ["henderson_hasselbalch_check", "expected_bicarbonate"]


def expected_bicarbonate(ph: float, pco2_mmhg: float) -> float:
    """Bicarbonate (mmol/L) that pH and pCO2 imply by Henderson-Hasselbalch (constants in checks.yaml)."""
    hh = read_knowledge_yaml("checks.yaml")["henderson_hasselbalch"]
    return hh["co2_solubility"] * pco2_mmhg * 10 ** (ph - hh["pka"])


def henderson_hasselbalch_check(ph: float, pco2_mmhg: float, hco3: float) -> str | None:
    """A warning text when the three blood-gas values disagree beyond the stated tolerance, else None."""
    hh = read_knowledge_yaml("checks.yaml")["henderson_hasselbalch"]
    expected = expected_bicarbonate(ph, pco2_mmhg)
    diff = abs(hco3 - expected)
    if diff > max(hh["tolerance_fraction"] * expected, hh["min_abs"]):
        implied_ph = hh["pka"] + math.log10(hco3 / (hh["co2_solubility"] * pco2_mmhg))
        return (f"pH {ph:.2f}, pCO2 {pco2_mmhg:.0f} mmHg and bicarbonate {hco3:.0f} mmol/L do not fit "
                f"Henderson-Hasselbalch: pH and pCO2 imply bicarbonate {expected:.1f} mmol/L "
                f"(bicarbonate and pCO2 imply pH {implied_ph:.2f}); check for a transcription error "
                f"or samples taken at different times (tolerance {hh['tolerance_fraction']:.0%})")
    return None
