"""The demo scenario: probe clouds in analytic vortex and strain flows.

One sample = one flow family with random parameters, placed by a random rigid motion
``u'(x) = R u(Rᵀ(x − c))`` (``R`` uniform on SO(3), times a mirror when reflections are on
and a coin says so; pressure is a scalar, velocity and pressure gradient are polar vectors so
``u' = R u`` holds for improper ``R`` too), probed at random points of the cube
``[−region, region]³`` (outside the body for the sphere family).  Inputs: velocity, pressure,
pressure gradient, strain rate S and vorticity (what a mean-flow solution provides at each
probe); target: the anisotropy of :mod:`searcher.data._closure`.

Every draw comes from ``numpy.random.default_rng([seed, sample, stream])``, so a sample can be
regenerated with more or fewer probes (same flow, same placement) for the density stress sets.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial.transform import Rotation

from searcher.data._closure import make_realizable, strain_rotation, szl_anisotropy, time_scale
from searcher.data._flows import FAMILIES, draw_params, evaluate_flow
from searcher.data._kinds import FIELD_KINDS, Field, to_irreps
from searcher.errors import UserError

__all__ = ["DEMO_FIELDS", "Sample", "Placement", "demo_sample", "demo_samples", "place_flow"]

DEMO_FIELDS = tuple(Field(name, kind, FIELD_KINDS[kind], role, "node") for name, kind, role in (
    ("velocity", "vector", "input"),
    ("pressure", "scalar", "input"),
    ("pressure_gradient", "vector", "input"),
    ("strain_rate", "traceless_symmetric_tensor", "input"),
    ("vorticity", "axial_vector", "input"),
    ("scaled_strain", "traceless_symmetric_tensor", "input"),
    ("scaled_vorticity", "axial_vector", "input"),
    ("anisotropy", "traceless_symmetric_tensor", "target"),
))
_PARAMS, _PLACE, _PROBES = 0, 1, 2   # random streams per sample


@dataclass
class Sample:
    """One graph before centring, edges and normalisation.

    ``pos [N, 3]`` world positions; ``fields`` name → irreps-basis values ``[N, dim]`` (node)
    or ``[1, dim]`` (graph), float64; ``edge_index`` from the file, or None.
    """

    pos: np.ndarray
    fields: dict[str, np.ndarray]
    family: str
    sample: int
    source: str = "demo"
    edge_index: np.ndarray | None = None
    info: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Placement:
    """Rigid placement ``x ↦ R x + c`` of a body-frame flow (R orthogonal, maybe improper)."""

    rotation: np.ndarray
    centre: np.ndarray


def place_flow(family: str, params: dict, placement: Placement, x: np.ndarray):
    """Evaluate a placed flow at world points ``x [N, 3]``: (u, G, p, ∇p) in the world frame."""
    r, c = placement.rotation, placement.centre
    u, g, p, gp = evaluate_flow(family, params, (x - c) @ r)   # rows: Rᵀ(x − c)
    return u @ r.T, np.einsum("ik,nkl,jl->nij", r, g, r), p, gp @ r.T


def _placement(rng: np.random.Generator, region: float, reflect: bool) -> Placement:
    r = Rotation.random(random_state=rng).as_matrix()
    if reflect and rng.random() < 0.5:
        r = r @ np.diag([1.0, 1.0, -1.0])
    return Placement(r, rng.uniform(-region / 2, region / 2, size=3))


def _probes(rng, n, region, family, params, centre) -> np.ndarray:
    if family != "sphere":
        return rng.uniform(-region, region, size=(n, 3))
    keep_out = 1.05 * params["radius"] * params["L"]
    points = np.empty((0, 3))
    while len(points) < n:   # rejection sampling; the body fills < 5 % of the cube
        cand = rng.uniform(-region, region, size=(2 * n, 3))
        points = np.concatenate([points, cand[np.linalg.norm(cand - centre, axis=1) > keep_out]])
    return points[:n]


def demo_sample(demo_cfg: dict, index: int, probes: int | None = None) -> Sample:
    """Generate sample ``index`` of the demo section ``task.demo`` (optionally re-probed)."""
    seed, families = int(demo_cfg["seed"]), list(demo_cfg["families"])
    region = float(demo_cfg["region"])
    family = families[index % len(families)]
    params = draw_params(family, np.random.default_rng([seed, index, _PARAMS]))
    place = _placement(np.random.default_rng([seed, index, _PLACE]), region,
                       bool(demo_cfg["reflect"]))
    n = int(demo_cfg["probes"] if probes is None else probes)
    x = _probes(np.random.default_rng([seed, index, _PROBES, n]), n, region, family, params,
                place.centre)
    u, g, p, gp = place_flow(family, params, place, x)
    s_rate, omega = strain_rotation(g)
    tau = time_scale(s_rate, omega)
    b, scaled = make_realizable(szl_anisotropy(g, tau))
    # vorticity = curl u = (2 Ω_zy, 2 Ω_xz, 2 Ω_yx) of the placed field, so it is an axial
    # vector: it picks up det(R) under a mirror, as its 1e irreps say
    vort = 2.0 * np.stack([omega[:, 2, 1], omega[:, 0, 2], omega[:, 1, 0]], axis=1)
    values = {"velocity": u, "pressure": p, "pressure_gradient": gp, "strain_rate": s_rate,
              "vorticity": vort, "scaled_strain": tau[:, None, None] * s_rate,
              "scaled_vorticity": tau[:, None] * vort, "anisotropy": b}
    fields = {f.name: to_irreps(f.kind, values[f.name]) for f in DEMO_FIELDS}
    return Sample(x, fields, family, index, info={"params": params, "realizability_scaled": scaled})


def demo_samples(demo_cfg: dict) -> list[Sample]:
    """All ``task.demo.samples`` samples, families assigned in turn."""
    unknown = sorted(set(demo_cfg["families"]) - set(FAMILIES))
    if unknown:
        raise UserError.single(f"unknown flow families {unknown} (rule: each of "
                               f"{', '.join(FAMILIES)})", path="task.demo.families")
    return [demo_sample(demo_cfg, i) for i in range(int(demo_cfg["samples"]))]
