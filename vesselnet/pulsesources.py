"""Boundary sources of a pulsatile analysis as harmonic phasors.

A prescribed inflow node injects its waveform's harmonics (SPEC 7: tabulated
samples or the ejection shape; a constant inflow injects nothing above
harmonic 0); a fixed-pressure node holds its pressure waveform's harmonics
(none above harmonic 0 when constant).  Harmonic 0 of every source is the
steady value the steady solve uses, so the means agree by construction.
Convention ``e^(+i omega t)`` (:mod:`vesselnet.waveforms`).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping

import numpy as np

from .errors import NetworkSpecError, Problem
from .model import Network
from .waveforms import DEFAULT_HARMONICS, ejection_waveform, harmonics, resample_periodic

ANALYSIS_SAMPLES = 512
"""Input waveforms are sampled (or resampled, to a multiple of their own sample
count) at no fewer points than this before their harmonics are taken."""

PERIOD_RTOL = 1e-9
"""Waveform periods closer than this (relative) are the same period."""


@dataclasses.dataclass(frozen=True)
class Sources:
    """Harmonic phasors of every boundary source (SI), rows n = 0..K.

    ``inflow_m3_s[n, node]`` is injected flow (NaN-free), ``pressure_pa[n, node]``
    the pressure of fixed nodes (0 elsewhere); ``pulsatile`` names the nodes
    whose source oscillates.
    """

    period_s: float
    inflow_m3_s: np.ndarray
    pressure_pa: np.ndarray
    pulsatile: tuple[str, ...]


def source_harmonics(network: Network, *, n_harmonics: int = DEFAULT_HARMONICS,
                     pressure_waveforms: Mapping[str, Mapping[str, object]] | None = None) -> Sources:
    """The harmonics of the network's inflow waveforms and of given pressure waveforms.

    Parameters
    ----------
    network : Network
        Inflow waveforms come from ``network.nodes.inflow_waveforms`` (SPEC 7:
        ``period_s`` + ``samples_m3_s``, or ``stroke_volume_m3``,
        ``heart_rate_hz``, ``ejection_time_s``).
    n_harmonics : int
        K.
    pressure_waveforms : mapping of node id to {"period_s", "samples_pa"}, optional
        Pressure waveforms of fixed-pressure nodes (evenly spaced samples over
        one period).

    Returns
    -------
    Sources

    Raises
    ------
    NetworkSpecError
        No pulsatile source at all, waveforms of different periods, or a
        pressure waveform on a node without a fixed pressure.

    Notes
    -----
    Tabulated samples are resampled by periodic linear interpolation to a
    multiple of their count (so their mean is kept exactly), the ejection
    shape is sampled at :data:`ANALYSIS_SAMPLES` points; harmonic 0 is then
    replaced by the node's steady value (``inflow_m3_s``/``pressure_pa``).

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> net = Network.build(nodes={"h": {"inflow_m3_s": 1e-4}},
    ...     vessels=[{"id": "a", "from": "h", "to": "t", "length_m": 0.1, "radius_m": 0.01}],
    ...     beds=[{"id": "b", "node": "t", "resistance_pa_s_m3": 1e8}],
    ...     inflow_waveforms={"h": {"period_s": 1.0, "samples_m3_s": (0.0, 2e-4, 2e-4, 0.0)}})
    >>> s = source_harmonics(net, n_harmonics=2)
    >>> print(s.period_s, s.pulsatile, round(s.inflow_m3_s[0, 0].real * 1e4, 6))
    1.0 ('h',) 1.0
    """
    nodes = network.nodes
    k = int(n_harmonics)
    if k < 1:
        raise spec_error(network, "pulse", f"n_harmonics must be >= 1, got {n_harmonics}",
                          "use the default (20) or more")
    n = len(nodes)
    inflow = np.zeros((k + 1, n), dtype=complex)
    pressure = np.zeros((k + 1, n), dtype=complex)
    inflow[0] = np.nan_to_num(nodes.inflow_m3_s)
    pressure[0] = np.nan_to_num(nodes.pressure_pa)
    periods: dict[str, float] = {}
    for row, wave in sorted(nodes.inflow_waveforms.items()):
        period, samples = _waveform_samples(wave)
        inflow[1:, row] = _harmonics(network, nodes.ids[row], samples, k)[1:]
        periods[nodes.ids[row]] = period
    for node_id, wave in (pressure_waveforms or {}).items():
        row = nodes.index.get(str(node_id))
        if row is None or np.isnan(nodes.pressure_pa[row]):
            what = "no such node" if row is None else "the node has no fixed pressure"
            raise spec_error(network, f"pressure waveform '{node_id}'", what,
                              "give pressure waveforms only to fixed-pressure nodes")
        samples = np.asarray(wave["samples_pa"], dtype=float)
        samples = resample_periodic(samples, samples.size * -(-ANALYSIS_SAMPLES // samples.size))
        pressure[1:, row] = _harmonics(network, str(node_id), samples, k)[1:]
        periods[str(node_id)] = float(wave["period_s"])
    if not periods:
        raise spec_error(network, "pulse", "no pulsatile source: no node has an inflow or "
                          "pressure waveform", "give a node an inflow waveform (SPEC 7: "
                          "{stroke_volume, heart_rate, ejection_time} or {period, samples})")
    first = next(iter(periods.values()))
    odd = {i: p for i, p in periods.items() if abs(p - first) > PERIOD_RTOL * first}
    if odd:
        listed = ", ".join(f"'{i}' {p:.6g} s" for i, p in periods.items())
        raise spec_error(network, "pulse", f"the waveforms have different periods: {listed}",
                          "give every waveform the same period (heart rate)")
    return Sources(first, inflow, pressure, tuple(periods))


def _waveform_samples(wave: Mapping[str, object]) -> tuple[float, np.ndarray]:
    if "samples_m3_s" in wave:
        samples = np.asarray(wave["samples_m3_s"], dtype=float)
        m = samples.size * -(-ANALYSIS_SAMPLES // samples.size)
        return float(wave["period_s"]), resample_periodic(samples, m)
    hr = float(wave["heart_rate_hz"])
    return 1.0 / hr, ejection_waveform(float(wave["stroke_volume_m3"]), hr,
                                       float(wave["ejection_time_s"]), ANALYSIS_SAMPLES)


def _harmonics(network: Network, node_id: str, samples: np.ndarray, k: int) -> np.ndarray:
    if k > samples.size // 2:
        raise spec_error(network, f"waveform '{node_id}'",
                          f"{k} harmonics need at least {2 * k} samples, got {samples.size}",
                          "use fewer harmonics")
    return harmonics(samples, k)


def spec_error(network: Network, where: str, message: str, fix: str) -> NetworkSpecError:
    """A located-at-the-network input problem (no line: the item is named instead)."""
    return NetworkSpecError([Problem(network.source, 0, 0, where, message, fix)])
