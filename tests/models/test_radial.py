"""Radial bases and envelopes against their published formulas and e3nn's reference."""
from __future__ import annotations

import math

import pytest
import torch
from e3nn.math import soft_one_hot_linspace

from searcher.errors import UserError
from searcher.models import ENVELOPES, RADIAL_BASES, RadialEmbedding

C, N = 0.6, 6
D = torch.linspace(0.01, 0.59, 41, dtype=torch.float64)
K = torch.arange(1, N + 1, dtype=torch.float64)


def test_bessel_is_dimenet_over_its_zero_limit_and_is_one_at_zero():
    # DimeNet (Klicpera et al. 2020): sqrt(2/c) sin(nπd/c)/d; our basis divides it by its
    # d → 0 limit sqrt(2/c)·nπ/c (derived: sin(x)/x → 1), the normalised sinc form.
    got = RADIAL_BASES.get("bessel")(D[:, None], K, C)
    limit = math.sqrt(2 / C) * K * math.pi / C
    want = math.sqrt(2 / C) * torch.sin(K * math.pi * D[:, None] / C) / D[:, None]
    assert torch.allclose(got * limit, want, atol=1e-12)
    # e3nn reference with start=0, end=c, no cutoff (it divides by zero at 0, so d > 0).
    ref = soft_one_hot_linspace(D, 0.0, C, N, basis="bessel", cutoff=False)
    assert torch.allclose(got * limit, ref, atol=1e-10)
    zero = RADIAL_BASES.get("bessel")(torch.zeros(1, 1, dtype=torch.float64), K, C)
    assert torch.equal(zero[0], torch.ones(N, dtype=torch.float64))


@pytest.mark.parametrize("name", ["gaussian", "bessel", "cosine", "smooth_finite", "fourier"])
def test_every_basis_stays_bounded_as_edges_shrink(name):
    # Bounded by a constant independent of the cutoff and of d/c: e3nn's normalisations put
    # every value below ~1.2·e² (smooth_finite's 1.14136·e²·e^-2 peak = 1.14; derived).
    for cutoff in (1e-3, 1.0, 1e3):
        d = cutoff * torch.logspace(-8, 0, 200, dtype=torch.float64)[:-1]
        values = RADIAL_BASES.get(name)(d[:, None], K, cutoff)
        assert torch.isfinite(values).all()
        assert float(values.abs().max()) <= 1.2, (name, cutoff)


def test_local_scale_divides_by_the_mean_edge_length_at_the_receiver():
    # Edge lengths 1e-4 and 3e-4 arrive at node 0 (mean 2e-4), 2.0 at node 1: in local
    # units they become 0.5, 1.5 and 1.0 (derived), so one embedding serves both scales.
    d = torch.tensor([1e-4, 3e-4, 2.0], dtype=torch.float64)
    dst = torch.tensor([0, 0, 1])
    local = RadialEmbedding("gaussian", N, 3.0, "polynomial", 6, scale="local").double()
    plain = RadialEmbedding("gaussian", N, 3.0, "polynomial", 6).double()
    want = plain(torch.tensor([0.5, 1.5, 1.0], dtype=torch.float64))
    assert torch.allclose(local(d, dst), want, atol=1e-12)
    assert torch.allclose(local(d * 1e3, dst), want, atol=1e-12)   # scale-free
    assert "scale=local" in local.extra_repr() and "scale" not in plain.extra_repr()
    with pytest.raises(UserError) as err:
        RadialEmbedding("gaussian", N, 3.0, "polynomial", 6, scale="relative")
    assert "model.radial.scale" in str(err.value) and "absolute, local" in str(err.value)


def test_gaussian_matches_schnet_and_e3nn():
    # SchNet (Schütt et al. 2017): exp(-γ(d-μ_k)²), μ_k on [0, c], γ = 1/Δ².
    step = C / (N - 1)
    mu = torch.arange(N, dtype=torch.float64) * step
    got = RADIAL_BASES.get("gaussian")(D[:, None], K, C)
    assert torch.allclose(got * 1.12, torch.exp(-(D[:, None] - mu) ** 2 / step ** 2))
    ref = soft_one_hot_linspace(D, 0.0, C, N, basis="gaussian", cutoff=False)  # e3nn
    assert torch.allclose(got, ref, atol=1e-12)


@pytest.mark.parametrize("name", ["cosine", "smooth_finite", "fourier"])
def test_compact_bases_match_e3nn_with_cutoff(name):
    got = RADIAL_BASES.get(name)(D[:, None], K, C)
    ref = soft_one_hot_linspace(D, 0.0, C, N, basis=name, cutoff=True)  # e3nn reference
    assert torch.allclose(got, ref, atol=1e-10)


def test_polynomial_envelope_dimenet_p6():
    # DimeNet: u(0)=1, u(1)=0, u'(1)=0 for p = 6; 0 beyond the cutoff.
    u = ENVELOPES.get("polynomial")
    x = torch.tensor([0.0, 1.0 - 1e-6, 1.0, 1.5], dtype=torch.float64, requires_grad=True)
    y = u(x, 6)
    (grad,) = torch.autograd.grad(y.sum(), x)
    y = y.detach()
    assert y[0] == 1 and abs(float(y[1])) < 1e-9 and y[2] == 0 and y[3] == 0
    assert abs(float(grad[1])) < 1e-4  # u'(1) = 0 (derived: u' ~ O(1-x) near 1)
    mid = torch.tensor([0.5], dtype=torch.float64)
    want = 1 - 28 * 0.5 ** 6 + 48 * 0.5 ** 7 - 21 * 0.5 ** 8  # formula with p=6 (derived)
    assert torch.allclose(u(mid, 6), torch.tensor([want], dtype=torch.float64))


def test_cosine_cutoff_behler():
    # Behler (2011): ½[cos(πd/r_c)+1] for d ≤ r_c, else 0.
    d = torch.tensor([0.0, 0.3, 0.6, 0.7], dtype=torch.float64)
    got = ENVELOPES.get("cosine")(d / C, 0)
    want = torch.tensor([1.0, 0.5 * (math.cos(math.pi / 2) + 1), 0.0, 0.0], dtype=torch.float64)
    assert torch.allclose(got, want, atol=1e-12)


def test_embedding_is_basis_times_envelope_and_wrong_name_lists_choices():
    emb = RadialEmbedding("bessel", N, C, "polynomial", 6).double()
    assert torch.allclose(emb(D), RADIAL_BASES.get("bessel")(D[:, None], K, C)
                          * ENVELOPES.get("polynomial")(D[:, None] / C, 6))
    with pytest.raises(UserError) as err:
        RadialEmbedding("besel", N, C, "polynomial", 6)  # noqa: the misspelling is the point
    assert "gaussian, bessel, cosine, smooth_finite, fourier" in str(err.value)
    assert "model.radial.basis" in str(err.value)
