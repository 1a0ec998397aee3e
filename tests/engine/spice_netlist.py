"""Reference transients from ngspice: a bus written as a SPICE netlist, run in batch mode, waveforms read back.

This lives in tests/ on purpose: it is the independent second route the simulator is checked against, not
part of the product. The netlist models the same differential mode as the engine:

- the pair is one line of impedance Z0 against a common return (node 0). Trunk sections and stubs are
  lossless `T` elements (Z0, TD = length / (VF * c0)) when the cable has no series resistance, else LTRA
  lossy lines with constant per-metre R (loop resistance, 2 x the per-conductor value), L = Z0 / v,
  C = 1 / (Z0 * v), G = 0 -- the line the engine builds with no skin effect and no dielectric loss.
  On buses with dozens of sections, many under a metre, T lines multiply breakpoints and LTRA slows to a
  crawl; use the ladder there (the benchmark does).
  (`line_model="ladder"` instead cascades lossless `T` sections with the series resistance lumped between
  them, a check on LTRA itself.)
- a branch is a chain of the same sections from its trunk junction through the points its nodes hang on to its
  open far end;
- each receiver is its two line networks in series across the pair, 2 x 12 kOhm / UL (TIA-485-A defines the
  unit load per line), in parallel with its device's input capacitance, at the end of its stub;
- a parallel terminator is R; an "rc" terminator is R in series with C;
- each bias network is its differential DC equivalent: pull_up + pull_down across the pair;
- the active driver is a Thevenin source (open_circuit_v behind source_ohm) at the end of its stub, with a
  linear ramp whose 10-90 % time is rise_time_s (so 0-100 % lasts rise_time_s / 0.8), written as PWL;
- the driving node's own receiver input is left out; a node that may drive but is not driving loads the bus
  as a receiver; the primary driver, when another node drives, loads the bus with its own device's receiver.

ngspice is run as `ngspice -b` with a `.control` block that writes the receiver voltages with `wrdata`. LTRA
interpolates its past waveforms linearly (LININTERP): with its default quadratic interpolation the time step
collapsed on one netlist (a terminated chain with stubs, 2.4 µs into a 3 µs run) and the run never ended; at the
steps used here the two differ far below the agreement asked.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.solve import Probe, node_probe
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S

NGSPICE = "ngspice"
LINE_OHM_PER_UNIT_LOAD = 12_000.0  # TIA-485-A: 1 mA at +12 V on one line, the other at 0 V


def _receiver_ohm(unit_loads: float) -> float:
    """A receiver across the pair: its A and B line networks in series."""
    return 2.0 * LINE_OHM_PER_UNIT_LOAD / unit_loads


def ngspice_path() -> str | None:
    """Path of the ngspice executable, or None when it is not installed."""
    return shutil.which(NGSPICE)


@dataclass(frozen=True, slots=True)
class SpiceWaveforms:
    time_s: np.ndarray  # (n_t,)
    receiver_names: tuple[str, ...]
    v_diff_v: np.ndarray  # (n_receivers, n_t)
    netlist: str
    elapsed_s: float  # wall time of the ngspice run
    analysis_s: float  # ngspice's own transient analysis time (its "rusage trantime"), nan for an operating point


@dataclass(frozen=True, slots=True)
class _Section:
    node_a: str
    node_b: str
    length_m: float


class _Circuit:
    """Spice node names and elements for one bus, built once per driver."""

    def __init__(self, bus: Bus, driver_name: str | None, extra_positions_m: list[float]) -> None:
        plan = bus.plan
        self.bus = bus
        self.driver_name = driver_name or plan.driver.name
        self.sections: list[_Section] = []
        self.lines: list[str] = []
        self.receiver_nodes: dict[str, str] = {}  # receiver name -> spice node
        self.driver_node = ""
        positions = {0.0, plan.trunk_length_m, plan.driver.position_m}
        positions.update(n.position_m for n in plan.nodes)
        positions.update(t.position_m for t in plan.terminations)
        positions.update(extra_positions_m)
        positions.update(b.position_m for b in plan.bias)
        positions.update(b.junction_position_m for b in bus.layout.branches)
        self.trunk_positions = sorted(positions)
        self.trunk_node = {p: f"t{i}" for i, p in enumerate(self.trunk_positions)}
        for i in range(len(self.trunk_positions) - 1):
            a, b = self.trunk_positions[i], self.trunk_positions[i + 1]
            self.sections.append(_Section(self.trunk_node[a], self.trunk_node[b], b - a))
        # each branch: a chain of sections from its trunk junction through its nodes' points to its far end
        self.taps: dict[str, tuple[str, float]] = {}  # node on a branch -> (spice node along it, own stub)
        placed = [(n.name, bus.layout.place(n)) for n in plan.nodes]
        for i, branch in enumerate(bus.layout.branches):
            mine = [(name, where[1], where[2]) for name, where in placed if where is not None and where[0] is branch]
            stops = sorted({branch.length_m, *(a for _, a, _ in mine)})
            spice = {0.0: self.trunk_node[branch.junction_position_m]}
            before = 0.0
            for k, x in enumerate(s for s in stops if s > 0.0):
                spice[x] = f"b{i}_{k}"
                self.sections.append(_Section(spice[before], spice[x], x - before))
                before = x
            for name, along, own in mine:
                self.taps[name] = (spice[along], own)

    def node_end(self, tag: str, name: str, position_m: float, stub_length_m: float) -> str:
        """The end of a node's stub, on the trunk or on its branch."""
        if name not in self.taps:
            return self.stub_end(tag, position_m, stub_length_m)
        tap, own = self.taps[name]
        if own <= 0.0:
            return tap
        end = f"s_{tag}"
        self.sections.append(_Section(tap, end, own))
        return end

    def stub_end(self, tag: str, position_m: float, stub_length_m: float) -> str:
        tap = self.trunk_node[position_m]
        if stub_length_m <= 0.0:
            return tap
        end = f"s_{tag}"
        self.sections.append(_Section(tap, end, stub_length_m))
        return end


def _fmt(value: float) -> str:
    return f"{value:.12g}"


def _receiver(lines: list[str], tag: str, node: str, r_ohm: float, c_f: float) -> None:
    lines.append(f"R_{tag} {node} 0 {_fmt(r_ohm)}")
    if c_f > 0.0:
        lines.append(f"C_{tag} {node} 0 {_fmt(c_f)}")


def _line_elements(bus: Bus, sections: list[_Section], line_model: str, max_section_delay_s: float) -> list[str]:
    cable = bus.cable
    v_m_per_s = cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S
    z0 = cable.z0_ohm
    r_loop_ohm_per_m = 2.0 * cable.resistance_ohm_per_m
    out: list[str] = []
    for k, sec in enumerate(sections):
        if sec.length_m <= 0.0:
            out.append(f"V_short{k} {sec.node_a} {sec.node_b} 0")
            continue
        td = sec.length_m / v_m_per_s
        if r_loop_ohm_per_m == 0.0:
            out.append(f"T{k} {sec.node_a} 0 {sec.node_b} 0 Z0={_fmt(z0)} TD={_fmt(td)}")
        elif line_model == "ltra":
            out.append(
                f".model ltra{k} LTRA R={_fmt(r_loop_ohm_per_m)} L={_fmt(z0 / v_m_per_s)} G=0 "
                f"C={_fmt(1.0 / (z0 * v_m_per_s))} LEN={_fmt(sec.length_m)} LININTERP=1"
            )
            out.append(f"O{k} {sec.node_a} 0 {sec.node_b} 0 ltra{k}")
        elif line_model == "ladder":
            # Lumped RLC pi sections, each far shorter electrically than the edge.
            n = max(1, math.ceil(td / max_section_delay_s))
            piece_m = sec.length_m / n
            r_piece, l_piece = r_loop_ohm_per_m * piece_m, z0 / v_m_per_s * piece_m
            c_half = piece_m / (z0 * v_m_per_s) / 2.0
            prev = sec.node_a
            for j in range(n):
                mid = f"l{k}_{j}a"
                nxt = sec.node_b if j == n - 1 else f"l{k}_{j}b"
                out.append(f"CA{k}_{j} {prev} 0 {_fmt(c_half)}")
                out.append(f"R{k}_{j} {prev} {mid} {_fmt(r_piece)}")
                out.append(f"L{k}_{j} {mid} {nxt} {_fmt(l_piece)}")
                out.append(f"CB{k}_{j} {nxt} 0 {_fmt(c_half)}")
                prev = nxt
        else:
            raise ValueError(f"line_model must be 'ltra' or 'ladder', got {line_model!r}")
    return out


def _pwl_points(
    levels_v: list[float], bit_time_s: float, ramp_s: float, start_s: float = 0.0
) -> list[tuple[float, float]]:
    """PWL corners: level k holds from the end of its ramp; each change ramps linearly over ramp_s, starting at
    start_s + k * bit_time_s."""
    points = [(0.0, levels_v[0])]
    for k in range(1, len(levels_v)):
        if levels_v[k] == levels_v[k - 1]:
            continue
        t0 = start_s + k * bit_time_s
        points.append((t0, levels_v[k - 1]))
        points.append((t0 + ramp_s, levels_v[k]))
    return points


def bus_netlist(
    bus: Bus,
    *,
    stop_time_s: float | None,
    driver_name: str | None = None,
    source_points: list[tuple[float, float]] | None = None,
    max_step_s: float | None = None,
    line_model: str = "ltra",
    output_path: str = "out.txt",
    probes: Sequence[Probe] | None = None,
) -> tuple[str, dict[str, str]]:
    """The bus as an ngspice netlist; returns (netlist text, probe label -> spice node).

    `source_points` are PWL (time, open-circuit volts) corners of the driver; default one rising edge 0 ->
    open_circuit_v starting at t = 0 and ramping linearly for rise_time_s / 0.8.
    stop_time_s None: a DC operating point instead, the source at its last PWL value.
    probes: what to write out (engine.solve.Probe: a node's input, a trunk position, the driver's pins);
    default every node.
    """
    plan = bus.plan
    drv = bus.driver
    ramp_s = drv.rise_time_s / 0.8
    probes = [node_probe(n.name) for n in plan.nodes] if probes is None else list(probes)
    extra = [p.position_m for p in probes if p.kind == "junction" and p.position_m is not None]
    circuit = _Circuit(bus, driver_name, extra)
    lines = circuit.lines
    # Primary driver: a source when it drives, else its receiver's load.
    primary_end = circuit.stub_end("drv", plan.driver.position_m, plan.driver.stub_length_m)
    primary_drives = circuit.driver_name == plan.driver.name
    if primary_drives:
        circuit.driver_node = primary_end
    else:
        own = bus.driver_device
        _receiver(lines, "drv", primary_end, _receiver_ohm(own.unit_loads), own.input_capacitance_f)
    known = {plan.driver.name}
    for i, node in enumerate(plan.nodes):
        known.add(node.name)
        end = circuit.node_end(f"n{i}", node.name, node.position_m, node.stub_length_m)
        circuit.receiver_nodes[node.name] = end
        if node.name == circuit.driver_name:
            if not node.may_drive:
                raise ValueError(f"node '{node.name}' is a receiver and cannot drive")
            circuit.driver_node = end
            continue  # its own receiver input is left out while it drives, as in the engine
        device = bus.devices[node.name]
        _receiver(lines, f"n{i}", end, _receiver_ohm(device.unit_loads), device.input_capacitance_f)
    if circuit.driver_name not in known:
        raise ValueError(f"unknown driver name {circuit.driver_name!r}")
    for k, term in enumerate(plan.terminations):
        tap = circuit.trunk_node[term.position_m]
        if term.kind == "rc" and term.capacitance_f is not None:
            lines.append(f"RT{k} {tap} tc{k} {_fmt(term.resistance_ohm)}")
            lines.append(f"CT{k} tc{k} 0 {_fmt(term.capacitance_f)}")
        else:
            lines.append(f"RT{k} {tap} 0 {_fmt(term.resistance_ohm)}")
    for k, bias in enumerate(plan.bias):
        r_bias = bias.pull_up_ohm + bias.pull_down_ohm
        lines.append(f"RB{k} {circuit.trunk_node[bias.position_m]} 0 {_fmt(r_bias)}")
    if max_step_s is None:
        max_step_s = ramp_s / 25.0
    if source_points is None:
        source_points = [(0.0, 0.0), (ramp_s, drv.open_circuit_v)]
    if stop_time_s is None:
        lines.append(f"VS vs 0 DC {_fmt(source_points[-1][1])}")
        analysis = []
    else:
        pwl = " ".join(f"{_fmt(t)} {_fmt(v)}" for t, v in source_points)
        lines.append(f"VS vs 0 PWL({pwl})")
        analysis = [f".tran {_fmt(max_step_s)} {_fmt(stop_time_s)} 0 {_fmt(max_step_s)}"]
    lines.append(f"RS vs {circuit.driver_node} {_fmt(max(drv.source_ohm, 1e-6))}")
    lines += _line_elements(bus, circuit.sections, line_model, ramp_s / 160.0)
    probe_nodes = {}
    for p in probes:
        if p.kind == "node" and p.node is not None:
            probe_nodes[p.name] = circuit.receiver_nodes[p.node]
        elif p.kind == "junction" and p.position_m is not None:
            probe_nodes[p.name] = circuit.trunk_node[p.position_m]
        else:
            probe_nodes[p.name] = circuit.driver_node
    wanted = " ".join(f"v({node})" for node in probe_nodes.values())
    text = "\n".join(
        [
            f"* pairline reference transient, driver {circuit.driver_name}",
            *lines,
            ".options reltol=1e-4 abstol=1e-12 vntol=1e-7 chgtol=1e-16 trtol=1",
            *analysis,
            ".control",
            "set wr_singlescale",
            "set wr_vecnames",
            "option numdgt=12",
            "op" if stop_time_s is None else "run",
            *([] if stop_time_s is None else ["rusage trantime"]),
            f"wrdata {output_path} {wanted}",
            "quit",
            ".endc",
            ".end",
            "",
        ]
    )
    return text, probe_nodes


def run_netlist(netlist: str, receiver_names: tuple[str, ...], timeout_s: float = 300.0) -> SpiceWaveforms:
    """Run ngspice in batch mode on a netlist written by bus_netlist and read back the receiver voltages."""
    exe = ngspice_path()
    if exe is None:
        raise FileNotFoundError("ngspice is not installed (Debian package 'ngspice')")
    import time

    with tempfile.TemporaryDirectory(prefix="pairline-spice-") as tmp:
        work = Path(tmp)
        (work / "bus.cir").write_text(netlist)
        env = dict(os.environ, HOME=tmp)  # no user spinit/.spiceinit surprises
        started = time.perf_counter()
        proc = subprocess.run(
            [exe, "-b", "bus.cir"], cwd=work, capture_output=True, text=True, timeout=timeout_s, env=env
        )
        elapsed_s = time.perf_counter() - started
        out = work / "out.txt"
        if proc.returncode != 0 or not out.exists():
            raise RuntimeError(
                f"ngspice failed (exit {proc.returncode}):\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}"
            )
        data = np.loadtxt(out, skiprows=1, ndmin=2)
    time_s = data[:, 0]
    v = data[:, 1:].T
    # ngspice may repeat a time point at breakpoints; keep the last value of each.
    keep = np.append(np.diff(time_s) > 0.0, True)
    found = re.search(r"Transient (?:analysis )?time\s*=\s*([0-9.eE+-]+)", proc.stdout + proc.stderr)
    analysis_s = float(found.group(1)) if found else float("nan")
    return SpiceWaveforms(time_s[keep], receiver_names, v[:, keep], netlist, elapsed_s, analysis_s)


def step_waveforms(
    bus: Bus,
    stop_time_s: float,
    *,
    driver_name: str | None = None,
    line_model: str = "ltra",
    probes: Sequence[Probe] | None = None,
    max_step_s: float | None = None,
    timeout_s: float = 300.0,
) -> SpiceWaveforms:
    """Probe voltages (default every node) for one rising edge 0 -> open_circuit_v of the driver from t = 0."""
    text, nodes = bus_netlist(
        bus,
        stop_time_s=stop_time_s,
        driver_name=driver_name,
        line_model=line_model,
        probes=probes,
        max_step_s=max_step_s,
    )
    return run_netlist(text, tuple(nodes), timeout_s)


def pattern_waveforms(
    bus: Bus,
    bits: str,
    bit_time_s: float,
    *,
    driver_name: str | None = None,
    start_s: float = 0.0,
    repeats: int = 1,
    line_model: str = "ltra",
    probes: Sequence[Probe] | None = None,
    max_step_s: float | None = None,
) -> SpiceWaveforms:
    """Probe voltages for a bit pattern (1 -> +V, 0 -> -V), each bit's ramp starting start_s + k * bit_time_s
    after t = 0 and the line at rest at the first bit's level; the pattern is repeated `repeats` times."""
    v = bus.driver.open_circuit_v
    seq = bits * repeats
    levels = [v if b == "1" else -v for b in seq]
    points = _pwl_points(levels, bit_time_s, bus.driver.rise_time_s / 0.8, start_s)
    stop = start_s + len(seq) * bit_time_s
    text, nodes = bus_netlist(
        bus,
        stop_time_s=stop,
        driver_name=driver_name,
        source_points=points,
        line_model=line_model,
        probes=probes,
        max_step_s=max_step_s,
    )
    return run_netlist(text, tuple(nodes))


def dc_levels(bus: Bus, *, driver_name: str | None = None, probes: Sequence[Probe] | None = None) -> np.ndarray:
    """Settled probe voltages (n_probes,) for the driver at +open_circuit_v: an ngspice operating point."""
    text, nodes = bus_netlist(bus, stop_time_s=None, driver_name=driver_name, probes=probes)
    return run_netlist(text, tuple(nodes)).v_diff_v[:, -1]
