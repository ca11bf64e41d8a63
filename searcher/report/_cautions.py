"""Cautions printed in every dossier: a learned closure is evidence, not a design basis."""
from __future__ import annotations

__all__ = ["CAUTIONS", "cautions_for"]

CAUTIONS = (
    "A learned closure or surrogate must be validated against experiments or trusted "
    "simulations before it informs any design decision.",
    "Local codes and licensed engineering practice prevail over anything in this dossier.",
    "Errors here are measured on the study's own data and stress sets; they say nothing about "
    "flows, geometries or regimes outside them.",
)


def cautions_for(content: dict) -> list[str]:
    """The fixed cautions plus those the measured evidence calls for.

    Args:
        content: the dossier content (reads ``finalists``, ``fidelity_transfer``, ``settings``).
    """
    extra = []
    if content.get("settings", {}).get("quick"):
        extra.append("Made with --quick: few seeds and epochs; treat the statistics as a "
                     "rehearsal, not as evidence.")
    transfer = content.get("fidelity_transfer") or {}
    if transfer.get("weak"):
        extra.append("Search-time scores did not predict full-fidelity scores well; a better "
                     "configuration may have been pruned or ranked low during the search.")
    for fin in content.get("finalists", []):
        failed = [s["seed"] for s in fin.get("seeds", []) if s.get("status") != "completed"]
        if failed:
            extra.append(f"{fin['label']}: seed(s) {failed} did not complete training.")
    return list(CAUTIONS) + extra
