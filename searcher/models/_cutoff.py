"""``model.radial.cutoff: from_data``: the cutoff the data's longest edge asks for.

With the neighbours rule an edge has no upper length, so a fixed cutoff may silence edges
the graph rule made.  ``from_data`` sets the cutoff to ``CUTOFF_MARGIN`` times the longest
edge of the dataset's graphs (``Dataset.stats["graphs"]["edge_len_max"]``; with
``model.radial.scale: local`` the longest edge over the mean length arriving at its
receiver, ``local_len_max``).  The margin keeps the longest edge audible: the default
polynomial envelope (p = 6) is 0.20 at d/c = 1/1.25, where a margin of 1 would give it 0.
"""
from __future__ import annotations

import copy

from searcher.errors import UserError
from searcher.options import DATA_DERIVED

__all__ = ["CUTOFF_MARGIN", "resolve_cutoff"]

CUTOFF_MARGIN = 1.25
WORD = DATA_DERIVED["model.radial.cutoff"]


def resolve_cutoff(model_cfg: dict, stats: dict | None) -> dict:
    """``model_cfg`` with a ``from_data`` cutoff replaced by its number (else unchanged).

    Args:
        model_cfg: the resolved ``model`` section.
        stats: graph statistics (``Dataset.stats["graphs"]``) holding ``edge_len_max`` and
            ``local_len_max``.

    Raises:
        UserError: ``from_data`` without statistics of the data's edges.

    Example:
        >>> resolve_cutoff({"radial": {"cutoff": "from_data"}}, {"edge_len_max": 2.0})
        {'radial': {'cutoff': 2.5}}
    """
    radial = model_cfg["radial"]
    if radial["cutoff"] != WORD:
        return model_cfg
    key = "local_len_max" if radial.get("scale") == "local" else "edge_len_max"
    longest = (stats or {}).get(key)
    if not longest:
        raise UserError.single(f"{WORD} derives the cutoff from the longest edge of the data's "
                               f"graphs, but no edge lengths were given ({key}); build the "
                               "model from a dataset's stats", path="model.radial.cutoff")
    out = copy.deepcopy(model_cfg)
    out["radial"]["cutoff"] = float(CUTOFF_MARGIN * longest)
    return out
