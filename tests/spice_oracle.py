"""Test oracle: solve a vessel network as an electrical circuit with ngspice.

A test helper, not part of the library.  It writes a netlist, runs the
general-purpose circuit simulator ngspice (``ngspice -b``) in a temporary
directory and reads the results back at full double precision, so that
vesselnet's solvers can be checked against an independent program.

Analogy (common practice, no source): pressure = voltage, volume flow =
current, hydraulic resistance = resistance, inertance = inductance,
compliance = capacitance.  Time is not scaled (1 s = 1 s).

Scaling
-------
The oracle itself is unit-free: it takes volts, amperes, ohms, henries and
farads.  Use a :class:`Scaling` to convert SI values so that the numbers
ngspice sees are well conditioned (of order 1e-3 .. 1e6):

* :data:`MACRO` (large arteries, organ beds): 1 V = 1 mmHg, 1 A = 1 mL/s,
  so 1 ohm = 1 mmHg*s/mL (1.333e8 Pa*s/m^3), 1 H = 1 mmHg*s^2/mL,
  1 F = 1 mL/mmHg.
* :data:`MICRO` (microvascular networks): 1 V = 1 mmHg, 1 A = 1 nL/s,
  so 1 ohm = 1 mmHg*s/nL (1.333e14 Pa*s/m^3).

Sign conventions
----------------
* Node indices run 0 .. n_nodes-1; spice names them ``n0``, ``n1``, ...
  Ground (spice node ``0``) is 0 V.
* ``solve_dc``: a resistor ``(a, b, ohms)`` carries current
  ``(V_a - V_b) / ohms``, positive from ``a`` to ``b``.  A resistor to a fixed
  reference voltage ``(node, None, ohms, reference_volts)`` (an organ bed
  draining to venous pressure) carries current positive from ``node`` into the
  reference.  ``injections`` are currents INTO the node (flow entering the
  network); ``fixed_pressures`` are ideal voltage sources from the node to
  ground.
* ``transient``: an element ``(kind, a, b, value)`` carries current positive
  from ``a`` to ``b`` through the element (``b`` or ``a`` may be ``None``,
  ground).  A source ``('I', node, waveform)`` pushes its current INTO the node
  from ground; ``('V', node, waveform)`` holds the node's voltage against
  ground.  Source currents are reported as the current each source delivers
  INTO its node.

Every current is read from a 0 V voltage source ("ammeter") in series with
the element, i.e. from ngspice's modified-nodal branch unknowns, not formed
as (V_a - V_b)/R: that stays accurate for tiny resistances where the voltage
drop is lost in rounding of the node voltages.

ngspice is run with ``-n`` (no ``.spiceinit``), an empty ``spinit`` of our own
(``SPICE_SCRIPTS``; no code models loaded, none needed), ``HOME`` set to the
temporary directory (ngspice 39 crashes with a segmentation fault when HOME is
unset) and ``LC_ALL=C``.  Any warning or error on ngspice's stderr (for
example a singular matrix, which ngspice would otherwise paper over with gmin
stepping and return wrong numbers) raises :class:`NgspiceError`.

Examples
--------
>>> v, i = solve_dc(2, [(0, 1, 3.0), (1, None, 7.0, 0.0)], {0: 1.0}, {1: 0.1})
>>> print(round(v[1], 12), round(i[0], 12), round(i[1], 12))
0.91 0.03 0.13
"""

from __future__ import annotations

import functools
import math
import os
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import NamedTuple, Sequence

import numpy as np

MMHG_PA = 133.322387415
"""One conventional millimetre of mercury in pascal (13.5951 g/cm^3 * 9.80665 m/s^2 * 1 mm;
common practice, no source)."""

_VECTORS_PER_WRDATA = 100
"""Vectors per ``wrdata`` command (several output files keep each control line short)."""

_FATAL_MARKERS = ("error", "warning", "singular", "stepping", "too small", "abort")

_TIMEOUT_S = 120.0


class NgspiceError(RuntimeError):
    """ngspice is missing, failed, warned, or wrote output that cannot be read."""


# --------------------------------------------------------------------------- scaling
@dataclass(frozen=True)
class Scaling:
    """What one volt and one ampere stand for.

    Parameters
    ----------
    pressure_pa : float
        Pascal per volt.
    flow_m3_s : float
        m^3/s per ampere.

    Notes
    -----
    Derived units: 1 ohm = pressure_pa/flow_m3_s Pa*s/m^3; 1 H =
    pressure_pa/flow_m3_s Pa*s^2/m^3; 1 F = flow_m3_s/pressure_pa m^3/Pa.

    Examples
    --------
    >>> print(round(MACRO.ohms(1.3332238741e8), 6), round(MACRO.farads(1e-6 / MMHG_PA), 6))
    1.0 1.0
    """

    pressure_pa: float
    flow_m3_s: float

    @property
    def ohm_pa_s_m3(self) -> float:
        """Pa*s/m^3 per ohm (also Pa*s^2/m^3 per henry)."""
        return self.pressure_pa / self.flow_m3_s

    def volts(self, pressure_pa):
        """Pressure (Pa) to volts."""
        return np.asarray(pressure_pa, dtype=float) / self.pressure_pa

    def amperes(self, flow_m3_s):
        """Flow (m^3/s) to amperes."""
        return np.asarray(flow_m3_s, dtype=float) / self.flow_m3_s

    def ohms(self, resistance_pa_s_m3):
        """Hydraulic resistance (Pa*s/m^3) to ohms."""
        return np.asarray(resistance_pa_s_m3, dtype=float) / self.ohm_pa_s_m3

    def henries(self, inertance_pa_s2_m3):
        """Inertance (Pa*s^2/m^3) to henries."""
        return np.asarray(inertance_pa_s2_m3, dtype=float) / self.ohm_pa_s_m3

    def farads(self, compliance_m3_pa):
        """Compliance (m^3/Pa) to farads."""
        return np.asarray(compliance_m3_pa, dtype=float) * self.ohm_pa_s_m3

    def pressure_pa_from(self, volts):
        """Volts to pressure (Pa)."""
        return np.asarray(volts, dtype=float) * self.pressure_pa

    def flow_m3_s_from(self, amperes):
        """Amperes to flow (m^3/s)."""
        return np.asarray(amperes, dtype=float) * self.flow_m3_s


MACRO = Scaling(pressure_pa=MMHG_PA, flow_m3_s=1e-6)
"""1 V = 1 mmHg, 1 A = 1 mL/s, 1 ohm = 1 mmHg*s/mL."""

MICRO = Scaling(pressure_pa=MMHG_PA, flow_m3_s=1e-12)
"""1 V = 1 mmHg, 1 A = 1 nL/s, 1 ohm = 1 mmHg*s/nL."""


# --------------------------------------------------------------------------- waveforms
@dataclass(frozen=True)
class Dc:
    """Constant value (volts or amperes)."""

    value: float

    def spice(self, tstop_s: float) -> str:
        """Source specification for a netlist running to ``tstop_s``."""
        return f"DC {_num(self.value)}"


@dataclass(frozen=True)
class Sine:
    """``offset + amplitude * sin(2*pi*frequency_hz*(t - delay_s) + phase)``.

    For ``t < delay_s`` ngspice holds ``offset + amplitude * sin(phase)``.
    ``phase_deg`` is in degrees.  The operating point (``initial='op'``) uses
    the value at t = 0.
    """

    offset: float
    amplitude: float
    frequency_hz: float
    phase_deg: float = 0.0
    delay_s: float = 0.0

    def spice(self, tstop_s: float) -> str:
        """Source specification for a netlist running to ``tstop_s``."""
        args = (self.offset, self.amplitude, self.frequency_hz, self.delay_s, 0.0, self.phase_deg)
        return "SIN(" + " ".join(_num(a) for a in args) + ")"


@dataclass(frozen=True)
class Pwl:
    """Piecewise-linear waveform through ``(times_s[k], values[k])``.

    Held at the first value before ``times_s[0]`` and at the last after the
    end.  With ``period_s`` the pattern repeats every ``period_s`` seconds
    (``times_s`` must then lie in ``[0, period_s]`` and the first and last
    values should agree).  The repetition is expanded here into one long
    list, so that ngspice places a time step on every corner (its own
    ``r=`` repeat does not, in ngspice 39, after the first period).
    """

    times_s: tuple[float, ...]
    values: tuple[float, ...]
    period_s: float | None = None

    def spice(self, tstop_s: float) -> str:
        """Source specification for a netlist running to ``tstop_s`` (periods expanded)."""
        t = np.asarray(self.times_s, dtype=float)
        y = np.asarray(self.values, dtype=float)
        if t.ndim != 1 or t.shape != y.shape or t.size < 2 or np.any(np.diff(t) <= 0):
            raise ValueError("Pwl: times_s must be increasing, at least two, one value each; "
                             f"got {t.size} times and {y.size} values")
        if self.period_s is not None:
            if not (t[0] >= 0 and t[-1] <= self.period_s):
                raise ValueError(f"Pwl: times_s must lie in [0, period_s={self.period_s}], "
                                 f"got [{t[0]}, {t[-1]}]")
            if t[0] == 0 and t[-1] == self.period_s and y[0] != y[-1]:
                raise ValueError(f"Pwl: a periodic pattern must end where it starts, got values "
                                 f"{y[0]} at 0 and {y[-1]} at period_s; make them equal")
            n_periods = int(math.ceil(tstop_s / self.period_s)) + 1
            tt, yy = [], []
            for k in range(n_periods):
                shifted = t + k * self.period_s
                keep = np.ones(t.size, dtype=bool)
                if tt and math.isclose(shifted[0], tt[-1][-1], rel_tol=0, abs_tol=1e-15 * self.period_s):
                    keep[0] = False     # shared corner between periods
                tt.append(shifted[keep])
                yy.append(y[keep])
            t, y = np.concatenate(tt), np.concatenate(yy)
            if np.any(np.diff(t) <= 0):
                raise ValueError("Pwl: repeated pattern is not increasing in time; "
                                 "end the pattern before period_s or repeat its first value at period_s")
        return "PWL(" + " ".join(f"{_num(a)} {_num(b)}" for a, b in zip(t, y)) + ")"



# --------------------------------------------------------------------------- results
class TransientResult(NamedTuple):
    """Sampled transient solution.

    Attributes
    ----------
    time_s : ndarray, shape (n_times,)
        ngspice's own time points (not uniform: at most ``tmax`` apart, with
        extra points at waveform corners), from the first at or after
        ``tstart`` up to ``tstop``.  With ``initial='zero'`` (``uic``) ngspice
        writes no t = 0 row: the first row is its first step.
    node_voltages : ndarray, shape (n_times, len(nodes))
    element_currents : ndarray, shape (n_times, len(currents))
        Current through each requested element, positive from its ``a`` to ``b``.
    source_currents : ndarray, shape (n_times, len(sources))
        Current each source delivers INTO its node.
    """

    time_s: np.ndarray
    node_voltages: np.ndarray
    element_currents: np.ndarray
    source_currents: np.ndarray


# --------------------------------------------------------------------------- public API
@functools.lru_cache(maxsize=1)
def ngspice_available() -> bool:
    """True when an ``ngspice`` executable is on PATH and runs.

    Examples
    --------
    >>> isinstance(ngspice_available(), bool)
    True
    """
    exe = shutil.which("ngspice")
    if exe is None:
        return False
    try:
        done = subprocess.run([exe, "--version"], capture_output=True, text=True,
                              timeout=30, stdin=subprocess.DEVNULL)
    except (OSError, subprocess.TimeoutExpired):
        return False
    return done.returncode == 0 and "ngspice" in done.stdout.lower()


def solve_dc(n_nodes: int, resistors: Sequence, fixed_pressures: dict | None = None,
             injections: dict | None = None) -> tuple[np.ndarray, np.ndarray]:
    """DC operating point of a resistor network, solved by ngspice (``.op``).

    Parameters
    ----------
    n_nodes : int
        Nodes are 0 .. n_nodes-1; every node must be touched by a resistor
        or a fixed pressure.
    resistors : sequence
        Each item either ``(a, b, ohms)`` between two nodes, or
        ``(node, None, ohms, reference_volts)`` from a node to a fixed
        reference voltage (for example an organ bed draining to venous
        pressure).  ``ohms > 0``.
    fixed_pressures : dict int -> float, optional
        Node -> volts (ideal voltage source from the node to ground).
    injections : dict int -> float, optional
        Node -> amperes pushed INTO the node.

    Returns
    -------
    node_voltages : ndarray, shape (n_nodes,)
    resistor_currents : ndarray, shape (len(resistors),)
        Signed: from ``a`` to ``b``, or from ``node`` into the reference.

    Raises
    ------
    NgspiceError
        ngspice missing, failed, or warned (a singular matrix: a part of the
        network without a path to a fixed voltage).
    ValueError
        Bad indices or values.

    Examples
    --------
    >>> v, i = solve_dc(1, [(0, None, 2.0, 5.0)], {}, {0: 1.5})
    >>> print(round(v[0], 12), round(i[0], 12))
    8.0 1.5
    """
    fixed_pressures = dict(fixed_pressures or {})
    injections = dict(injections or {})
    n_nodes = _check_count(n_nodes)
    lines = ["* vesselnet test oracle: dc operating point"]
    touched = set()
    for k, item in enumerate(resistors):
        item = tuple(item)
        if len(item) == 3 and item[1] is not None:
            a, b, ohms = item
            a, b = _node(a, n_nodes, f"resistors[{k}]"), _node(b, n_nodes, f"resistors[{k}]")
            if a == b:
                raise ValueError(f"resistors[{k}]: both ends on node {a}; remove the self-loop")
            ohms = _positive(ohms, f"resistors[{k}] ohms")
            lines += [f"R{k} n{a} m{k} {_num(ohms)}", f"VM{k} m{k} n{b} DC 0"]
            touched |= {a, b}
        elif len(item) == 4 and item[1] is None:
            a, _, ohms, ref = item
            a = _node(a, n_nodes, f"resistors[{k}]")
            ohms = _positive(ohms, f"resistors[{k}] ohms")
            lines += [f"R{k} n{a} m{k} {_num(ohms)}", f"VM{k} m{k} 0 DC {_num(_finite(ref, f'resistors[{k}] reference'))}"]
            touched.add(a)
        else:
            raise ValueError(f"resistors[{k}]: expected (a, b, ohms) or (node, None, ohms, reference_volts), "
                             f"got {item!r}")
    for node, volts in fixed_pressures.items():
        node = _node(node, n_nodes, "fixed_pressures")
        lines.append(f"VF{node} n{node} 0 DC {_num(_finite(volts, f'fixed_pressures[{node}]'))}")
        touched.add(node)
    for node, amps in injections.items():
        node = _node(node, n_nodes, "injections")
        lines.append(f"II{node} 0 n{node} DC {_num(_finite(amps, f'injections[{node}]'))}")
    lonely = sorted(set(range(n_nodes)) - touched)
    if lonely:
        raise ValueError(f"solve_dc: nodes {lonely[:10]} touch no resistor and no fixed pressure; "
                         "connect them or lower n_nodes")
    vectors = [f"v(n{j})" for j in range(n_nodes)] + [f"i(vm{k})" for k in range(len(resistors))]
    table = _run(lines, "op", vectors)
    if table.shape[0] != 1:
        raise NgspiceError(f"solve_dc: expected one operating-point row, got {table.shape[0]}")
    row = table[0, 1:]
    return row[:n_nodes].copy(), row[n_nodes:].copy()


def transient(n_nodes: int, elements: Sequence, sources: Sequence, *, tstep: float, tstop: float,
              nodes: Sequence[int] | None = None, currents: Sequence[int] = (), tstart: float = 0.0,
              tmax: float | None = None, initial: str = "op", method: str = "trap") -> TransientResult:
    """Transient analysis of an R-L-C network driven by current and voltage sources.

    Parameters
    ----------
    n_nodes : int
        Nodes are 0 .. n_nodes-1; ``None`` in an element or source is ground (0 V).
    elements : sequence of (kind, a, b, value)
        ``kind`` is ``'R'`` (ohms), ``'L'`` (henries) or ``'C'`` (farads); value > 0.
    sources : sequence of (kind, node, waveform)
        ``('I', node, w)``: current ``w(t)`` pushed INTO ``node`` from ground.
        ``('V', node, w)``: voltage of ``node`` against ground is ``w(t)``.
        ``w`` is a :class:`Dc`, :class:`Sine` or :class:`Pwl`.
    tstep, tstop : float
        Output step hint and end time, s.
    nodes : sequence of int, optional
        Nodes whose voltages are returned (default: all, in order).
    currents : sequence of int
        Indices into ``elements`` whose currents are returned.
    tstart : float
        Results are returned from this time on (the run still starts at 0).
    tmax : float, optional
        Largest internal time step, s (default ``tstep``).  Accuracy is set
        mainly by this: the trapezoidal rule's error falls as tmax^2.
    initial : {'op', 'zero'}
        ``'op'``: start from ngspice's DC operating point with the sources at
        their t = 0 values.  ``'zero'``: ``uic``, every capacitor at 0 V and
        every inductor at 0 A at t = 0.
    method : {'trap', 'gear'}
        ngspice's integration method.

    Returns
    -------
    TransientResult

    Examples
    --------
    >>> res = transient(2, [("R", 0, 1, 0.5), ("C", 1, None, 1.5)], [("V", 0, Dc(2.0))],
    ...                 tstep=0.01, tstop=0.75, nodes=[1], currents=[1], initial="zero", tmax=1e-3)
    >>> print(round(res.node_voltages[-1, 0], 4), round(res.element_currents[-1, 0], 4))
    1.2642 1.4715
    """
    n_nodes = _check_count(n_nodes)
    if initial not in ("op", "zero"):
        raise ValueError(f"transient: initial must be 'op' or 'zero', got {initial!r}")
    if method not in ("trap", "gear"):
        raise ValueError(f"transient: method must be 'trap' or 'gear', got {method!r}")
    tstep, tstop = _positive(tstep, "tstep"), _positive(tstop, "tstop")
    tmax = tstep if tmax is None else _positive(tmax, "tmax")
    tstart = _finite(tstart, "tstart")
    if not 0 <= tstart < tstop:
        raise ValueError(f"transient: need 0 <= tstart < tstop, got tstart={tstart}, tstop={tstop}")
    nodes = list(range(n_nodes)) if nodes is None else [_node(j, n_nodes, "nodes") for j in nodes]
    measured = set()
    for c in currents:
        if not (isinstance(c, (int, np.integer)) and 0 <= c < len(elements)):
            raise ValueError(f"transient: currents must index elements (0..{len(elements) - 1}), got {c!r}")
        measured.add(int(c))

    def name(j, where):
        return "0" if j is None else f"n{_node(j, n_nodes, where)}"

    lines = ["* vesselnet test oracle: transient", f".options method={method} reltol=1e-6 "
             "abstol=1e-15 vntol=1e-12 chgtol=1e-18"]
    for k, item in enumerate(elements):
        kind, a, b, value = tuple(item)
        kind = str(kind).upper()
        if kind not in ("R", "L", "C"):
            raise ValueError(f"elements[{k}]: kind must be 'R', 'L' or 'C', got {kind!r}")
        na, nb = name(a, f"elements[{k}]"), name(b, f"elements[{k}]")
        if na == nb:
            raise ValueError(f"elements[{k}]: both ends on {na}; remove the self-loop")
        value = _positive(value, f"elements[{k}] value")
        if k in measured:
            lines += [f"{kind}{k} {na} m{k} {_num(value)}", f"VM{k} m{k} {nb} DC 0"]
        else:
            lines.append(f"{kind}{k} {na} {nb} {_num(value)}")
    for k, item in enumerate(sources):
        kind, node, wave = tuple(item)
        kind = str(kind).upper()
        nn = name(node, f"sources[{k}]")
        if nn == "0":
            raise ValueError(f"sources[{k}]: a source needs a node, got ground")
        if not isinstance(wave, (Dc, Sine, Pwl)):
            raise ValueError(f"sources[{k}]: waveform must be Dc, Sine or Pwl, got {type(wave).__name__}")
        spec = wave.spice(tstop)
        if kind == "I":     # ground -> s{k} through the source, then the ammeter s{k} -> node
            lines += [f"IS{k} 0 s{k} {spec}", f"VS{k} s{k} {nn} DC 0"]
        elif kind == "V":
            lines.append(f"VS{k} {nn} 0 {spec}")
        else:
            raise ValueError(f"sources[{k}]: kind must be 'I' or 'V', got {kind!r}")
    vectors = ([f"v(n{j})" for j in nodes] + [f"i(vm{k})" for k in currents]
               + [f"i(vs{k})" for k in range(len(sources))])
    analysis = f"tran {_num(tstep)} {_num(tstop)} {_num(tstart)} {_num(tmax)}" + (" uic" if initial == "zero" else "")
    table = _run(lines, analysis, vectors)
    time_s = table[:, 0]
    if time_s.size < 2 or np.any(np.diff(time_s) <= 0):
        raise NgspiceError("transient: ngspice's time column is not increasing")
    nv, nc = len(nodes), len(currents)
    src = table[:, 1 + nv + nc:].copy()
    for k, item in enumerate(sources):
        if str(item[0]).upper() == "V":
            src[:, k] = -src[:, k]      # spice: i(V) flows + -> - inside the source
    return TransientResult(time_s.copy(), table[:, 1:1 + nv].copy(), table[:, 1 + nv:1 + nv + nc].copy(), src)


# --------------------------------------------------------------------------- internals
def _run(lines: list[str], analysis: str, vectors: list[str]) -> np.ndarray:
    """Run ngspice on ``lines`` + a control block; return [scale, vectors...] rows."""
    exe = shutil.which("ngspice")
    if exe is None:
        raise NgspiceError("ngspice not found on PATH; install it: apt-get install -y ngspice")
    chunks = [vectors[i:i + _VECTORS_PER_WRDATA] for i in range(0, len(vectors), _VECTORS_PER_WRDATA)]
    control = [".control", "set numdgt=17", "set wr_vecnames", "set wr_singlescale", analysis]
    control += [f"wrdata out{c}.txt {' '.join(chunk)}" for c, chunk in enumerate(chunks)]
    control += ["quit 0", ".endc", ".end"]
    netlist = "\n".join(lines + control) + "\n"
    with tempfile.TemporaryDirectory(prefix="vesselnet-spice-") as tmp:
        tmp_path = Path(tmp)
        (tmp_path / "spinit").write_text("* empty: no code models needed\n")
        (tmp_path / "circuit.cir").write_text(netlist)
        env = dict(os.environ, SPICE_SCRIPTS=tmp, HOME=tmp, LC_ALL="C")
        try:
            done = subprocess.run([exe, "-b", "-n", "circuit.cir"], cwd=tmp, env=env, capture_output=True,
                                  text=True, timeout=_TIMEOUT_S, stdin=subprocess.DEVNULL)
        except subprocess.TimeoutExpired as exc:
            raise NgspiceError(f"ngspice: no answer after {_TIMEOUT_S:.0f} s; "
                               f"netlist starts:\n{_head(netlist)}") from exc
        bad = [ln for ln in done.stderr.splitlines() if any(m in ln.lower() for m in _FATAL_MARKERS)]
        if done.returncode != 0 or bad:
            raise NgspiceError(f"ngspice: exit status {done.returncode}, stderr:\n{done.stderr.strip()}\n"
                               f"netlist starts:\n{_head(netlist)}")
        parts = [_read_wrdata(tmp_path / f"out{c}.txt", chunk, done.stderr) for c, chunk in enumerate(chunks)]
    scale = parts[0][:, :1]
    for p in parts[1:]:
        if p.shape[0] != scale.shape[0] or not np.array_equal(p[:, 0], scale[:, 0]):
            raise NgspiceError("ngspice: output files disagree on their scale column")
    return np.hstack([scale] + [p[:, 1:] for p in parts])


def _read_wrdata(path: Path, names: list[str], stderr: str) -> np.ndarray:
    if not path.exists():
        raise NgspiceError(f"ngspice: wrote no {path.name}; stderr:\n{stderr.strip()}")
    text = path.read_text()
    header, _, body = text.partition("\n")
    got = [h.lower() for h in header.split()[1:]]
    if got != [n.lower() for n in names]:
        raise NgspiceError(f"ngspice: {path.name} has columns {got[:5]}..., expected {names[:5]}...")
    try:
        table = np.loadtxt(body.splitlines(), ndmin=2, dtype=float)
    except ValueError as exc:
        raise NgspiceError(f"ngspice: cannot read numbers in {path.name}: {exc}") from exc
    if table.shape[1] != len(names) + 1 or table.shape[0] == 0 or not np.all(np.isfinite(table)):
        raise NgspiceError(f"ngspice: {path.name} has shape {table.shape} or non-finite values, "
                           f"expected (rows, {len(names) + 1})")
    return table


def _head(netlist: str, n: int = 25) -> str:
    return "\n".join(netlist.splitlines()[:n])


def _num(x: float) -> str:
    """Full-precision literal that spice reads back exactly (no unit suffixes)."""
    return repr(float(x))


def _check_count(n) -> int:
    if not isinstance(n, (int, np.integer)) or n < 1:
        raise ValueError(f"n_nodes must be a positive integer, got {n!r}")
    return int(n)


def _node(j, n_nodes: int, where: str) -> int:
    if not isinstance(j, (int, np.integer)) or isinstance(j, bool) or not 0 <= j < n_nodes:
        raise ValueError(f"{where}: node must be an integer in 0..{n_nodes - 1}, got {j!r}")
    return int(j)


def _finite(x, where: str) -> float:
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"{where}: must be finite, got {x}")
    return x


def _positive(x, where: str) -> float:
    x = _finite(x, where)
    if x <= 0:
        raise ValueError(f"{where}: must be > 0, got {x}")
    return x
