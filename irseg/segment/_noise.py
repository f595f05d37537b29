"""Robust estimate of the sensor noise of a thermogram, in the image's units (K).

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

References
----------
J. Immerkær, "Fast noise variance estimation", Computer Vision and Image
Understanding 64(2):300-302, 1996 (from memory).
D. L. Donoho, I. M. Johnstone, "Ideal spatial adaptation by wavelet shrinkage",
Biometrika 81(3):425-455, 1994 (from memory).
"""

from __future__ import annotations

import numpy as np

__all__ = ["estimate_noise_k"]

_MAD_TO_SIGMA = 1.482602218505602  # 1 / Phi^-1(3/4), Gaussian consistency of the MAD
_KERNEL_NORM = 6.0  # sqrt(sum of squared kernel coefficients) = sqrt(36)


def estimate_noise_k(temperature: np.ndarray, *, mask: np.ndarray | None = None) -> float:
    """Estimate the standard deviation of white sensor noise, same units as the image.

    Parameters
    ----------
    temperature : (M, N) float ndarray
        Thermogram (K or °C); M, N >= 3.
    mask : (M, N) bool ndarray, optional
        True where pixels are invalid; every 3 x 3 window touching one is ignored.

    Returns
    -------
    noise_k : float
        Robust noise standard deviation (0.0 for a noise-free piecewise-linear image).

    References
    ----------
    Immerkær 1996; Donoho & Johnstone 1994 (see module docstring).
    """
    g = np.asarray(temperature, dtype=np.float32)  # residuals are small: float32 is ample
    # separable form: kernel = [1, -2, 1]^T [1, -2, 1]
    rows = g[:, :-2] - 2.0 * g[:, 1:-1] + g[:, 2:]
    resp = rows[:-2, :] - 2.0 * rows[1:-1, :] + rows[2:, :]
    if mask is not None:
        bad = np.asarray(mask, dtype=bool)
        # a window is bad if any of its 9 pixels is masked
        b = bad[:, :-2] | bad[:, 1:-1] | bad[:, 2:]
        b = b[:-2, :] | b[1:-1, :] | b[2:, :]
        resp = resp[~b]
    else:
        resp = resp.ravel()
    if resp.size == 0:
        return 0.0
    mad = float(np.median(np.abs(resp)))  # median of |response| (its own median is ~0)
    return mad * _MAD_TO_SIGMA / _KERNEL_NORM
