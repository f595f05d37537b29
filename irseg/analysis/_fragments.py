"""Fragments: pieces of one anomaly that a segmentation cut apart."""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from ._candidates import Candidate

__all__ = ["group_fragments", "SLIVER_FRACTION"]

SLIVER_FRACTION = 0.05  # a piece of a larger anomaly's rim is at most this fraction of its area
_CROSS = ndimage.generate_binary_structure(2, 1)


def group_fragments(
    accepted: list[Candidate], *, labels: np.ndarray, min_step_k: float
) -> tuple[list[Candidate], dict[int, int]]:
    """Fragments of a larger anomaly: ``(kept candidates, {fragment label: host label})``.

    A candidate touching a larger anomaly of the same sign (4-adjacent) is

    - *absorbed* into it (one defect, measured together) when their mean
      temperatures differ by less than ``min_step_k``: the segmentation split one
      plateau, it did not see a step (a jump below the step threshold is not a jump);
    - dropped as a *rim sliver* when it is a small piece (at most 5 % of the host's
      area) of the host's soft rim: every pixel within the host's rim extent and a
      contrast between the host's and zero. A blurred or conducting edge spreads the
      host's contrast outwards; a piece of that ramp cut off by the segmentation is
      the host's edge, not a defect of its own. Its pixels then count, like the rest
      of the rim, into the host's heat integral.

    Touching regions of *different* temperature that are not rim slivers (a stud
    beside an empty bay, a warm strip beside a cold patch) stay separate anomalies.
    """
    if len(accepted) < 2:
        return accepted, {}
    by_label = {c.label: c for c in accepted}
    order = sorted(accepted, key=lambda c: (c.n_px, c.label))
    dropped: set[int] = set()
    host_of: dict[int, int] = {}
    for c in order:
        ring = ndimage.binary_dilation(c.region, structure=_CROSS) & ~c.region
        hosts = [by_label[int(h)] for h in np.unique(labels[c.crop][ring]) if int(h) in by_label and int(h) != c.label]
        hosts = [h for h in hosts if h.n_px > c.n_px and np.sign(h.delta_k) == np.sign(c.delta_k)
                 and h.label not in dropped]
        if not hosts:
            continue
        host = max(hosts, key=lambda h: (h.n_px, -h.label))
        similar = [h for h in hosts if abs(h.mean_c - c.mean_c) < min_step_k]
        if similar:
            host_of[c.label] = max(similar, key=lambda h: (h.n_px, -h.label)).label
            continue
        if _is_rim_sliver(c, host):
            dropped.add(c.label)
    # chains (a fragment of a fragment) end at the final host
    for k in list(host_of):
        h = host_of[k]
        while h in host_of:
            h = host_of[h]
        host_of[k] = h
    host_of = {k: h for k, h in host_of.items() if h not in dropped}
    kept = [c for c in accepted if c.label not in dropped]
    return kept, host_of


def _is_rim_sliver(c: Candidate, host: Candidate) -> bool:
    """``c`` is a small, weaker piece lying wholly within ``host``'s soft rim."""
    if c.n_px > SLIVER_FRACTION * host.n_px or abs(c.delta_k) >= abs(host.delta_k):
        return False
    rows = c.rr + (c.r0 - host.r0)
    cols = c.cc + (c.c0 - host.c0)
    reach = host.region.shape  # the host's crop, where its distances are known
    within = (rows >= 0) & (rows < reach[0]) & (cols >= 0) & (cols < reach[1])
    return bool(within.all() and float(host.dist[rows, cols].max()) <= host.rim_reach_px)
