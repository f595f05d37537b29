"""The solver's memory-light forms give the whole-frame bits (issue 15, memory).

The edge weights ``v**2 + eta``, the data weights ``beta * w`` of a 0/1 mask and the v-step's
inverse diagonal are formed a block of rows at a time instead of being held as frame-sized arrays. Each check compares with
the whole-frame NumPy expression of the same discretisation, written here independently of
irseg (forward differences owned by the pixel at their start, ``docs/method.md``) [C], for
block sizes that put block edges everywhere. No memory figure is asserted here: the peak per
pixel is measured by ``benchmarks/bench_memory.py``.
"""

from __future__ import annotations

import numpy as np
import pytest

from irseg.segmentation import _operators, _regions, segment
from irseg.segmentation._at import solve_level
from irseg.segmentation._operators import (
    DataWeights,
    PhaseWeights,
    ScreenedInverse,
    Workspace,
    apply_screened_laplacian,
    apply_weighted_laplacian,
    pcg,
    phase_diagonal,
    times_data_weights,
)
from tests.support.at_images import whole_weighted_laplacian


@pytest.mark.parametrize("chunk", [1, 2, 7, 64])
def test_edge_and_data_weights_formed_by_blocks_give_the_whole_frame_bits(monkeypatch, chunk):
    monkeypatch.setattr(_operators, "_CHUNK_ROWS", chunk)
    rng = np.random.default_rng(chunk)
    m, n = 23, 17
    x = rng.normal(size=(m, n)).astype(np.float32)
    v = rng.random((m, n)).astype(np.float32)
    w = rng.random((m, n)) > 0.2  # a 0/1 data weight: masked pixels carry no data
    eta, beta = np.float32(1e-3), np.float32(0.37)
    c = np.square(v) + eta  # the edge weights at the owning pixel
    bw = np.multiply(w, beta, dtype=np.float32)
    ws = Workspace.for_shape((m, n), np.dtype(np.float32))
    out = np.empty_like(x)
    apply_weighted_laplacian(x, PhaseWeights(v, eta), None, DataWeights(w, beta), out, ws)
    np.testing.assert_array_equal(out, whole_weighted_laplacian(x, c[:, :-1], c[:-1, :], bw))
    diag = np.empty_like(x)
    phase_diagonal(DataWeights(w, beta), PhaseWeights(v, eta), diag, ws)
    whole = bw.copy()
    whole[:, :-1] += c[:, :-1]
    whole[:, 1:] += c[:, :-1]
    whole[:-1, :] += c[:-1, :]
    whole[1:, :] += c[:-1, :]
    np.testing.assert_array_equal(diag, whole)
    np.testing.assert_array_equal(times_data_weights(DataWeights(w, beta), x, out, ws), bw * x)


def _whole_screened_inverse(diag, k, free):
    """Inverse diagonal of ``diag + k L``, ``L`` the 5-point Neumann graph Laplacian: a pixel's
    degree is 4 inside, one less per border side it lies on (graph Laplacian, common practice);
    zero on fixed entries."""
    inv = diag + np.float32(4.0) * k
    inv[0, :] -= k
    inv[-1, :] -= k
    inv[:, 0] -= k
    inv[:, -1] -= k
    inv = np.float32(1.0) / inv
    return inv if free is None else inv * free


@pytest.mark.parametrize("chunk", [1, 2, 7, 64])
@pytest.mark.parametrize("shape", [(23, 17), (1, 9), (6, 1)])
def test_v_step_preconditioner_formed_by_blocks_gives_the_whole_frame_bits(monkeypatch, chunk, shape):
    monkeypatch.setattr(_operators, "_CHUNK_ROWS", chunk)
    rng = np.random.default_rng(chunk)
    diag = rng.random(shape).astype(np.float32) + np.float32(0.5)
    k = np.float32(0.3)
    for free in (None, rng.random(shape) > 0.2):
        inv = ScreenedInverse.for_level(diag, k, free)
        whole = _whole_screened_inverse(diag, k, free)
        np.testing.assert_array_equal(inv.into(np.empty_like(diag)), whole)
        r = rng.normal(size=shape).astype(np.float32)
        np.testing.assert_array_equal(inv(r, np.empty_like(r)), r * whole)


@pytest.mark.parametrize("chunk", [3, 64])
def test_v_step_solved_with_the_block_preconditioner_as_with_the_whole_one(monkeypatch, chunk):
    # the same conjugate-gradient iterates, bit for bit, whether the inverse diagonal is held or formed
    monkeypatch.setattr(_operators, "_CHUNK_ROWS", chunk)
    rng = np.random.default_rng(7)
    m, n = 31, 26
    diag = (rng.random((m, n)) * 3.0 + 0.2).astype(np.float32)
    free = rng.random((m, n)) > 0.1
    k_lap, k_pot = np.float32(0.4), np.float32(0.05)
    ws = Workspace.for_shape((m, n), np.dtype(np.float32))

    def apply(x, out):
        return apply_screened_laplacian(x, float(k_lap), diag, out, ws)

    start = rng.random((m, n)).astype(np.float32)
    whole = _whole_screened_inverse(diag, k_lap, free)
    held, formed = start.copy(), start.copy()
    a = pcg(apply, k_pot, held, whole, ws, rtol=1e-6, max_iter=9, free=free)
    inv = ScreenedInverse.for_level(diag, k_lap, free)
    b = pcg(apply, k_pot, formed, inv, ws, rtol=1e-6, max_iter=9, free=free,
            inv_sum=float(np.sum(whole, dtype=np.float64)))
    assert a == b
    np.testing.assert_array_equal(held, formed)


def test_a_bool_data_weight_solves_exactly_as_its_float_form(rng):
    # the finest grid passes its 0/1 weight as bool (a quarter of the memory): same iterates, same bits
    m, n = 40, 52
    g = (rng.normal(0.0, 0.1, (m, n)) + np.where(np.arange(n) < 26, 0.0, 2.0)).astype(np.float32)
    w = np.ones((m, n), bool)
    w[rng.integers(0, m, 30), rng.integers(0, n, 30)] = False
    w[10:14, 5:9] = False
    runs = []
    for weight in (w, w.astype(np.float32)):
        u, v = g.copy(), np.ones_like(g)
        res = solve_level(g, weight, u, v, alpha=0.05, beta=4.0, epsilon=1.5, eta=1e-4, max_alternations=6,
                          tol=0.0, cg_rtol=2e-2, cg_max_iter=12, record_energy=True)
        runs.append(res)
    np.testing.assert_array_equal(runs[0].u, runs[1].u)
    np.testing.assert_array_equal(runs[0].v, runs[1].v)
    assert runs[0].energies == runs[1].energies
    assert (runs[0].v[~w] == 1.0).all()  # no data, no edge: v held at 1 there


@pytest.mark.parametrize("block", [1, 3, 256])
def test_adjacent_region_pairs_by_row_blocks(monkeypatch, rng, block):
    monkeypatch.setattr(_regions, "_BLOCK_ROWS", block)
    labels = rng.integers(0, 90, (19, 13)).astype(np.int32)  # most pairs occur once: a lost one shows
    involved = np.zeros(90, bool)
    involved[::2] = True
    # every 4-adjacent pair of distinct positive labels, one of them involved, counted by brute force
    expected = set()
    for r in range(19):
        for c in range(13):
            for r2, c2 in ((r, c + 1), (r + 1, c)):
                if r2 < 19 and c2 < 13:
                    a, b = int(labels[r, c]), int(labels[r2, c2])
                    if a != b and a > 0 and b > 0 and (involved[a] or involved[b]):
                        expected.add((min(a, b), max(a, b)))
    got = _regions._adjacent_pairs(labels, involved)
    assert sorted(map(tuple, got.tolist())) == sorted(expected)


def test_without_the_phase_field_the_result_is_the_same(rng):
    # keep_v=False (the pipeline's call) frees v once the jump set and regions are formed: the rest is identical
    g = (rng.normal(0.0, 0.05, (48, 64)) + np.where(np.arange(64) < 30, 18.0, 20.0)).astype(np.float32)
    mask = np.zeros(g.shape, bool)
    mask[3, 5] = mask[40, 60] = True
    full = segment(g, mask=mask)
    light = segment(g, mask=mask, keep_v=False)
    assert light.v is None and full.v is not None
    for name in ("u", "edges", "labels"):
        np.testing.assert_array_equal(getattr(light, name), getattr(full, name))
    assert (light.n_regions, light.energy, light.message) == (full.n_regions, full.energy, full.message)
    assert full.n_regions >= 2  # the 2 K step (well above the noise) is cut
