"""Robust estimate of the sensor noise of a thermogram, in kelvin (a °C or K thermogram's differences).

The image is filtered with Immerkær's 3 x 3 kernel (a difference of two discrete
Laplacians)::

    [[ 1, -2,  1],
     [-2,  4, -2],
     [ 1, -2,  1]]

which annihilates constants, linear ramps and (away from corners) bilinear
surfaces, so what remains is mostly noise plus a sparse response at edges. For
white noise of standard deviation sigma the filtered value has standard deviation
``6 sigma`` (the kernel's squared coefficients sum to 36). Immerkær (1996) averages
``|response|``; edges bias that mean upward, so irseg takes the median absolute
value instead and scales it by 1.4826 (the Gaussian MAD factor), the robust
statistic Donoho & Johnstone (1994) use on the finest wavelet coefficients.
The same kernel with taps 3 pixels apart catches noise that is correlated over a
pixel or two; the larger of the two estimates is used.

References
----------
J. Immerkær, "Fast noise variance estimation", Computer Vision and Image
Understanding 64(2):300-302, 1996 (from memory).
D. L. Donoho, I. M. Johnstone, "Ideal spatial adaptation by wavelet shrinkage",
Biometrika 81(3):425-455, 1994 (from memory).
"""

from __future__ import annotations

import numpy as np

from .._shared import MAD_TO_SIGMA

__all__ = ["estimate_noise_k", "noise_statistics"]

_KERNEL_NORM = 6.0  # sqrt(sum of squared kernel coefficients) = sqrt(36)


def _mad_sigma(g: np.ndarray, bad: np.ndarray | None, step: int) -> float | None:
    """Immerkær response with taps ``step`` pixels apart -> robust sigma (None if no window)."""
    k = step
    if min(g.shape) <= 2 * k:
        return None
    rows = g[:, : -2 * k] - 2.0 * g[:, k:-k] + g[:, 2 * k :]
    resp = rows[: -2 * k, :] - 2.0 * rows[k:-k, :] + rows[2 * k :, :]
    if bad is not None:
        b = bad[:, : -2 * k] | bad[:, k:-k] | bad[:, 2 * k :]
        b = b[: -2 * k, :] | b[k:-k, :] | b[2 * k :, :]
        resp = resp[~b]
    else:
        resp = resp.ravel()
    if resp.size == 0:
        return None
    if resp.size > 100_000:  # a regular subsample keeps the median's error near 0.5 %
        resp = resp[:: resp.size // 50_000]
    mad = float(np.median(np.abs(resp)))  # median of |response| (its own median is ~0)
    return mad * MAD_TO_SIGMA / _KERNEL_NORM


def estimate_noise_k(temperature: np.ndarray, *, mask: np.ndarray | None = None) -> float:
    """Estimate the standard deviation of the sensor noise, K.

    The Immerkær response is evaluated with taps 1 and 3 pixels apart and the
    larger estimate is kept. For white noise both agree; camera noise is often
    correlated over a pixel or two (optics, resampling on export, compression),
    which hides it from the 1-pixel kernel but not from the wider one. The segmenter
    needs the full per-pixel amplitude, since correlated blobs look like small steps.

    Parameters
    ----------
    temperature : (M, N) float ndarray
        Thermogram (K or °C); M, N >= 3.
    mask : (M, N) bool ndarray, optional
        True where pixels are invalid; every window touching one is ignored.

    Returns
    -------
    noise_k : float
        Robust noise standard deviation, K (about 0 for a noise-free piecewise-linear image).

    References
    ----------
    Immerkær 1996; Donoho & Johnstone 1994 (see module docstring).
    """
    return noise_statistics(temperature, mask=mask)[0]


def noise_statistics(temperature: np.ndarray, *, mask: np.ndarray | None = None) -> tuple[float, float]:
    """Noise standard deviation and a correlation indicator.

    Parameters
    ----------
    temperature : (M, N) float ndarray
        Thermogram.
    mask : (M, N) bool ndarray, optional
        True on invalid pixels.

    Returns
    -------
    noise_k : float
        As :func:`estimate_noise_k`.
    correlation : float
        Ratio of the 3-pixel to the 1-pixel estimate: about 1 for white noise, larger
        when the noise is correlated between neighbouring pixels (1.0 when undefined).
    """
    g = np.asarray(temperature)
    finite = np.isfinite(g) if mask is None else (np.isfinite(g) & ~np.asarray(mask, dtype=bool))
    if not finite.any():
        return 0.0, 1.0
    if not finite.all():
        g = np.where(finite, g, 0.0)
    # residuals are small: float32 relative to the mean is ample
    g = np.subtract(g, float(np.mean(g[finite], dtype=np.float64)), dtype=np.float32)
    bad = None if mask is None else np.asarray(mask, dtype=bool)
    est = [_mad_sigma(g, bad, k) for k in (1, 3)]
    vals = [e for e in est if e is not None]
    if not vals:
        return 0.0, 1.0
    sigma = max(vals)
    corr = 1.0
    if est[0] is not None and est[1] is not None and est[0] > 0:
        corr = est[1] / est[0]
    return sigma, float(corr)
