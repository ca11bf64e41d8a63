"""Irreps as data, without e3nn: parsing, field kinds, hidden composition, reachability.

The spec layer must not import e3nn, so it carries a small parser for the e3nn notation
(``"16x0e+8x1o"``) and the selection rules needed to tell, before anything is built,
whether a network can produce a target at all.
"""
from __future__ import annotations

import re

__all__ = ["FIELD_KINDS", "DEMO_FIELDS", "LMAX_LIMIT", "parse_irreps", "format_irreps",
           "hidden_irreps", "task_fields", "reachable_irreps", "EQUIVARIANT_FAMILIES"]

LMAX_LIMIT = 8  # beyond this SH and tensor products get impractically large on CPU

FIELD_KINDS = {
    "scalar": "0e",
    "pseudoscalar": "0o",
    "vector": "1o",
    "axial_vector": "1e",
    "symmetric_tensor": "0e+2e",
    "traceless_symmetric_tensor": "2e",
    "tensor": "0e+1e+2e",
}

# The analytic-flow demo always offers the same probe fields.
DEMO_FIELDS = {
    "velocity": {"kind": "vector", "role": "input", "level": "node"},
    "pressure": {"kind": "scalar", "role": "input", "level": "node"},
    "pressure_gradient": {"kind": "vector", "role": "input", "level": "node"},
    "strain_rate": {"kind": "traceless_symmetric_tensor", "role": "input", "level": "node"},
    "vorticity": {"kind": "axial_vector", "role": "input", "level": "node"},
    "scaled_strain": {"kind": "traceless_symmetric_tensor", "role": "input", "level": "node"},
    "scaled_vorticity": {"kind": "axial_vector", "role": "input", "level": "node"},
    "anisotropy": {"kind": "traceless_symmetric_tensor", "role": "target", "level": "node"},
}

EQUIVARIANT_FAMILIES = ("steerable", "gated")

_TERM = re.compile(r"^(?:(\d+)\s*x\s*)?(\d+)([eo])$")


def parse_irreps(text: str) -> list[tuple[int, int, int]]:
    """Parse an e3nn irreps string into ``(multiplicity, l, parity)`` triples.

    Args:
        text: e.g. ``"16x0e + 8x1o"``; a bare ``"1o"`` means multiplicity 1.

    Returns:
        ``[(16, 0, 1), (8, 1, -1)]`` for the example (parity +1 = e, -1 = o).

    Raises:
        ValueError: a message saying which term is wrong and what is allowed.
    """
    if not isinstance(text, str) or not text.strip():
        raise ValueError("irreps must be a non-empty text such as '16x0e+8x1o'")
    out = []
    for raw in text.split("+"):
        term = raw.strip()
        match = _TERM.match(term)
        if not match:
            raise ValueError(f"term {term!r} is not of the form MULTxLP, e.g. '8x1o' "
                             "(multiplicity, order l, parity e or o)")
        mult = int(match.group(1)) if match.group(1) is not None else 1
        order = int(match.group(2))
        if mult < 1:
            raise ValueError(f"term {term!r}: multiplicity must be at least 1")
        if order > LMAX_LIMIT:
            raise ValueError(f"term {term!r}: order l must be at most {LMAX_LIMIT}")
        out.append((mult, order, 1 if match.group(3) == "e" else -1))
    return out


def format_irreps(terms) -> str:
    """Write ``(multiplicity, l, parity)`` triples in e3nn notation: ``"8x0e+4x1o"``."""
    return "+".join(f"{m}x{l}{'e' if p > 0 else 'o'}" for m, l, p in terms)


def hidden_irreps(hidden_cfg: dict, width: int) -> str:
    """Compose the hidden irreps of the equivariant families.

    ``hidden_cfg["irreps"]``, when not empty, is used as written (normalised).  Otherwise each
    order ``l = 0..lmax`` gets a multiplicity by ``taper``:

    - ``uniform``: ``multiplicity`` for every l;
    - ``tapered``: ``max(1, multiplicity // 2**l)`` (fewer copies of the costlier orders);
    - ``balanced``: ``max(1, round(width / (2l+1)))`` so every order carries about ``width``
      components, like the scalar channels of the radial MLPs (``multiplicity`` is not used).

    ``parity: natural`` keeps the parity ``(-1)**l`` of spherical harmonics (0e, 1o, 2e, ...);
    ``both`` adds the other parity at the same multiplicity.  0e is always present because
    gates and norms need scalars.

    Args:
        hidden_cfg: the resolved ``model.hidden`` mapping.
        width: the resolved ``model.width``.

    Returns:
        e.g. ``hidden_irreps({"irreps": "", "lmax": 2, "multiplicity": 8, "taper": "tapered",
        "parity": "both"}, 32) == "8x0e+8x0o+4x1e+4x1o+2x2e+2x2o"``.
    """
    if hidden_cfg.get("irreps"):
        return format_irreps(parse_irreps(hidden_cfg["irreps"]))
    mult, taper = hidden_cfg["multiplicity"], hidden_cfg["taper"]
    terms = []
    for order in range(hidden_cfg["lmax"] + 1):
        if taper == "tapered":
            count = max(1, mult // 2 ** order)
        elif taper == "balanced":
            count = max(1, round(width / (2 * order + 1)))
        else:
            count = mult
        natural = (-1) ** order
        parities = (1, -1) if hidden_cfg["parity"] == "both" else (natural,)
        terms += [(count, order, p) for p in parities]
    return format_irreps(terms)


def task_fields(task_cfg: dict) -> dict[str, dict]:
    """Describe the fields of a task as plain dicts (the data layer wraps them).

    Args:
        task_cfg: the resolved ``task`` mapping.

    Returns:
        name -> ``{"kind", "irreps", "role", "level"}``; the demo always gives velocity,
        pressure, pressure_gradient, strain_rate, vorticity (inputs) and anisotropy (node target).
    """
    declared = DEMO_FIELDS if task_cfg.get("source", "demo") == "demo" else task_cfg["fields"]
    return {name: {"kind": f["kind"], "irreps": FIELD_KINDS[f["kind"]], "role": f["role"],
                   "level": f.get("level", "node")} for name, f in declared.items()}


def _product(a: set, b: set) -> set:
    # l1 x l2 -> |l1-l2| .. l1+l2, parities multiply (Clebsch-Gordan selection rule)
    return {(l, p1 * p2) for l1, p1 in a for l2, p2 in b for l in range(abs(l1 - l2), l1 + l2 + 1)}


def reachable_irreps(hidden: str, sh_lmax: int) -> set[tuple[int, int]]:
    """Orders and parities an equivariant network can emit.

    A target irrep is reachable when it is in the hidden irreps or in hidden x SH(sh_lmax)
    (the edge spherical harmonics, parity ``(-1)**l``): the model head is a linear map from the
    hidden features plus a tensor product of them with the aggregated edge harmonics. Inputs
    of other parities only reach the target through hidden irreps that hold that parity.

    Args:
        hidden: hidden irreps string.
        sh_lmax: order of the edge spherical harmonics.

    Returns:
        set of ``(l, parity)``.
    """
    held = {(l, p) for _, l, p in parse_irreps(hidden)}
    sh = {(l, (-1) ** l) for l in range(sh_lmax + 1)}
    return held | _product(held, sh)
