"""Inputs, masks, knobs and the result contract of irseg.segmentation.segment.

Sources: the thermographer-knob checks follow the Mumford–Shah step criterion
(Mumford & Shah 1989, from memory [M]: a step of height h on a smoothing length ell
becomes a jump when h^2 sqrt(beta) / 2 > alpha); the noise check follows
Immerkær 1996 (kernel response 6 sigma, from memory [M]) with the Gaussian MAD
factor 1.4826 (Donoho & Johnstone 1994 [M]). Contract checks are issue 2's.
"""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.at_images import disk_mask, iou, region_of

from irseg.errors import ConfigError, ConvergenceWarning, InputError
from irseg.segmentation import Segmentation, estimate_noise_k, segment


def _wall(rng: np.random.Generator, n: int = 64) -> np.ndarray:
    g = np.where(disk_mask(n, n / 4), 21.5, 20.0)
    return g + rng.normal(0.0, 0.05, g.shape)


# ----------------------------------------------------------------------------- errors


@pytest.mark.parametrize(
    "bad, words",
    [
        (np.zeros(64), "2-D"),
        (np.zeros((4, 16, 16)), "2-D"),
        (np.zeros((5, 64)), "minimum is 8 x 8"),
        (np.zeros((16, 16), complex), "complex"),
        (np.zeros((16, 16), bool), "bool"),
        (np.zeros((16, 16), object), "object"),
    ],
)
def test_bad_shapes_and_dtypes(bad: np.ndarray, words: str) -> None:
    # issue 2: clear errors for bad shapes and dtypes, naming the problem
    with pytest.raises(InputError, match=words):
        segment(bad)


def test_nan_without_mask_is_an_error() -> None:
    g = np.full((16, 16), 20.0)
    g[3, 4] = np.nan
    g[5, 5] = np.inf
    with pytest.raises(InputError, match=r"2 non-finite .*mask="):
        segment(g)
    m = np.zeros(g.shape, bool)
    m[3, 4] = True  # the inf stays outside the mask
    with pytest.raises(InputError, match="outside the mask"):
        segment(g, mask=m)
    m[5, 5] = True
    seg = segment(g, mask=m)  # accepted once every non-finite pixel is masked
    assert np.isfinite(seg.u).all()


@pytest.mark.parametrize(
    "kwargs",
    [
        {"min_step_k": 0.0},
        {"min_step_k": -1.0},
        {"min_step_k": float("nan")},
        {"noise_k": -0.1},
        {"min_feature_px": 0.5},
        {"max_num_iter": 0},
        {"max_num_iter": 2.5},
        {"tol": -1.0},
        {"min_step_k": "0.5"},
    ],
)
def test_bad_knobs(kwargs: dict) -> None:
    with pytest.raises(ConfigError, match="segment: "):
        segment(np.zeros((16, 16)), **kwargs)


def test_bad_masks() -> None:
    g = np.zeros((16, 16))
    with pytest.raises(InputError, match="mask shape"):
        segment(g, mask=np.zeros((16, 15), bool))
    with pytest.raises(InputError, match="every pixel is masked"):
        segment(g, mask=np.ones((16, 16), bool))
    with pytest.raises(InputError, match="bool"):
        segment(g, mask=np.full((16, 16), 0.5))


# ----------------------------------------------------------------------------- mask


def test_masked_pixels_create_no_edges(rng: np.random.Generator) -> None:
    # issue 2: no data term on masked pixels and no edges from them. Masked pixels hold
    # wild values (a hot blob, a dead column, scattered dead pixels) on a uniform wall.
    g = 20.0 + rng.normal(0.0, 0.05, (80, 80))
    m = np.zeros(g.shape, bool)
    m[10:20, 10:20] = True
    m[:, 50] = True
    m[rng.integers(0, 80, 30), rng.integers(0, 80, 30)] = True
    g[m] = 80.0
    seg = segment(g, mask=m)
    assert not seg.edges.any()
    assert np.all(seg.v[m] == 1.0)
    assert np.all(seg.labels[m] == 0)
    assert np.all(seg.labels[~m] >= 1)
    # the dead column and dead pixels do not split the wall
    assert seg.n_regions == 1
    # u ignores the masked values: it stays near the wall temperature
    assert np.abs(seg.u - 20.0).max() < 0.3


def test_mask_keeps_real_edges(rng: np.random.Generator) -> None:
    g = _wall(rng)
    disk = disk_mask(64, 16)
    m = np.zeros(g.shape, bool)
    m[30:34, 5:60] = True  # a masked bar across the disk
    g[m] = np.nan
    seg = segment(g, mask=m)
    # a thick masked bar is a barrier (no merging through missing data): each half of the
    # disk is found as its own region, the wall around stays one region
    for half in (disk & (np.arange(64)[:, None] < 30), disk & (np.arange(64)[:, None] >= 34)):
        assert iou(region_of(seg.labels, half), half) >= 0.9
    assert seg.n_regions == 3  # two disk halves and the wall (joined around the bar ends)
    assert not seg.edges[m].any()


# ----------------------------------------------------------------------------- knobs


def test_step_at_min_step_makes_edge(rng: np.random.Generator) -> None:
    # a long straight step of exactly min_step_k must become an edge (issue 2)
    g = np.full((64, 64), 20.0)
    g[:, 32:] += 0.5
    g += rng.normal(0.0, 0.02, g.shape)
    seg = segment(g, min_step_k=0.5)
    assert seg.n_regions == 2
    assert seg.edges[:, 28:36].any(axis=1).all()


def test_small_step_and_ramp_make_no_edge(rng: np.random.Generator) -> None:
    # a 0.2 K step (below min_step_k = 0.5 K) on a 2 K ramp across the image: no edge at all
    n = 96
    xx = np.arange(n)[None, :].repeat(64, axis=0)
    g = 20.0 + 2.0 * xx / (n - 1) + 0.2 * (xx >= 48) + rng.normal(0.0, 0.02, xx.shape)
    seg = segment(g, min_step_k=0.5)
    assert not seg.edges.any()
    assert seg.n_regions == 1


@pytest.mark.parametrize("width, separated", [(2, False), (3, False), (8, True)])
def test_min_feature_px(rng: np.random.Generator, width: int, separated: bool) -> None:
    # features narrower than min_feature_px (4 px) are not separated; wider ones are
    g = np.full((64, 64), 20.0)
    strip = np.zeros(g.shape, bool)
    strip[10:54, 30 : 30 + width] = True
    g[strip] += 1.5
    g += rng.normal(0.0, 0.02, g.shape)
    seg = segment(g, min_feature_px=4.0)
    assert (seg.n_regions == 2) is separated
    if separated:
        assert iou(region_of(seg.labels, strip), strip) >= 0.9


def test_noise_estimate(rng: np.random.Generator) -> None:
    # Immerkær 1996 [M] + MAD (Donoho & Johnstone 1994 [M]): white noise on a piecewise
    # linear scene with a 2 K step is recovered within 7 % (the step's windows bias the
    # estimate upward by a few per cent on a frame this small; common practice).
    yy, xx = np.mgrid[:128, :128]
    scene = 20.0 + 0.02 * xx - 0.01 * yy + 2.0 * disk_mask(128, 20)
    for sigma in (0.05, 0.3):
        g = scene + rng.normal(0.0, sigma, scene.shape)
        assert estimate_noise_k(g) == pytest.approx(sigma, rel=0.07)
        seg = segment(g)
        assert seg.params.noise_estimated
        assert seg.params.noise_k == pytest.approx(sigma, rel=0.07)
        assert seg.params.noise_correlation == pytest.approx(1.0, abs=0.15)
    assert estimate_noise_k(scene) < 1e-4  # noise-free piecewise-linear: float32 rounding only


def test_correlated_noise(rng: np.random.Generator) -> None:
    # Gaussian-filtered white noise (correlation over ~1 px, as after camera optics) keeps
    # its per-pixel std (physics of linear filtering: rescaled to 0.3 K here). The 1-px
    # Immerkær kernel alone would see only a fraction of it; the wider taps recover it
    # within 10 %, and the segmenter makes no regions out of the blobs.
    from scipy import ndimage as ndi

    n = ndi.gaussian_filter(rng.normal(0.0, 1.0, (96, 128)), 0.7)
    g = 20.0 + n * (0.3 / n.std())
    assert estimate_noise_k(g) == pytest.approx(0.3, rel=0.10)
    seg = segment(g)
    assert seg.params.noise_correlation > 2.0
    assert seg.n_regions == 1
    assert seg.edges.mean() < 0.01


def test_noise_limits_the_step_threshold(rng: np.random.Generator) -> None:
    # strong noise raises the step threshold instead of making edges from noise
    g = 20.0 + rng.normal(0.0, 0.3, (96, 96))
    seg = segment(g, min_step_k=0.5)
    assert seg.params.jump_threshold_k > 0.5 * 0.6
    assert "noise" in seg.message
    assert seg.edges.mean() < 0.01
    assert seg.n_regions == 1


# ----------------------------------------------------------------------------- contract


def test_result_contract_and_determinism(rng: np.random.Generator) -> None:
    g = _wall(rng).astype(np.float32)
    a = segment(g)
    b = segment(g.copy())
    assert isinstance(a, Segmentation)
    for name in ("u", "v", "edges", "labels"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    assert a.energy == b.energy and a.params == b.params
    assert a.u.dtype == np.float32 and a.v.dtype == np.float32  # float32 in -> float32 out
    assert a.labels.dtype == np.int16 and a.edges.dtype == bool  # int16 while the regions fit (int32 above)
    assert a.u.shape == g.shape
    assert 0.0 <= a.v.min() and a.v.max() <= 1.0
    assert set(np.unique(a.labels)) == set(range(1, a.n_regions + 1))
    assert a.converged and a.iterations >= len(a.energy) >= 1
    p = a.params
    assert p.min_step_k == 0.5 and p.min_feature_px == 4.0
    assert p.alpha > 0 and p.beta > 0 and p.epsilon >= 1.0 and 0 < p.eta < p.alpha
    with pytest.raises(AttributeError):
        a.n_regions = 3  # frozen


@pytest.mark.parametrize("dtype, out", [(np.float64, np.float64), (np.int16, np.float64), (np.uint16, np.float64)])
def test_dtypes(dtype: type, out: type) -> None:
    g = np.full((32, 32), 293)
    g[8:24, 8:24] = 296  # whole kelvin, as an integer export stores them; a 3 K step, 6 × min_step_k
    seg = segment(g.astype(dtype), min_step_k=0.5)
    assert seg.u.dtype == out
    assert seg.n_regions == 2


def test_convergence_warning(rng: np.random.Generator) -> None:
    # non-convergence is a warning and converged=False, not an error (issue 2)
    with pytest.warns(ConvergenceWarning, match="max_num_iter"):
        seg = segment(_wall(rng), max_num_iter=1, tol=1e-12)
    assert seg.converged is False
    assert seg.n_regions >= 1


def test_top_level_entry_point() -> None:
    # contract: irseg.segment(...) is the function, also after `import irseg.segmentation`
    # (the subpackage has a name of its own, so the two can never shadow each other)
    import irseg
    import irseg.segmentation as sub

    g = np.full((16, 16), 20.0)
    g[4:12, 4:12] += 2.0
    assert irseg.segment(g).n_regions == 2
    assert irseg.segment is sub.segment
    assert not callable(sub)
    assert irseg.Segmentation is Segmentation


def test_offset_invariance_kelvin_vs_celsius(rng: np.random.Generator) -> None:
    # The functional only sees differences u - g and gradients (Mumford & Shah 1989 [M]):
    # the same scene in kelvin (+273.15, SI definition) gives the same regions and jump set.
    g = _wall(rng, 96)
    a = segment(g)
    b = segment(g + 273.15)
    np.testing.assert_array_equal(a.labels, b.labels)
    np.testing.assert_array_equal(a.edges, b.edges)
    np.testing.assert_allclose(b.u - 273.15, a.u, atol=1e-3)


def test_nan_from_solver_is_solver_error(monkeypatch: pytest.MonkeyPatch) -> None:
    # issue 2: NaN produced by the solver -> SolverError (not a silent result)
    import irseg.segmentation._segment as impl
    from irseg.errors import SolverError

    real = impl.solve_level

    def poisoned(*args, **kwargs):
        res = real(*args, **kwargs)
        res.u[0, 0] = np.nan
        return res

    monkeypatch.setattr(impl, "solve_level", poisoned)
    with pytest.raises(SolverError, match="non-finite"):
        segment(np.full((16, 16), 20.0))
