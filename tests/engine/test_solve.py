"""Whole-bus frequency response: closed forms, and scikit-rf as an independent network solver."""

import numpy as np
import pytest
import skrf
from pairline.engine.bus import Bus, build_bus
from pairline.engine.line import characteristic_impedance_ohm, propagation_constant_per_m
from pairline.engine.plan import BusInputError, load_plan
from pairline.engine.solve import dc_transfer, solve_bus
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S
from skrf.circuit import Circuit
from skrf.media import DefinedGammaZ0

# Source: TIA-485-A defines the unit load per line (1 mA at +12 V, 12 kOhm); across the pair a receiver is its two
# line networks in series, 24 kOhm per unit load.
RX_OHM_PER_UL = 24_000.0
LOSSLESS = {
    "class_key": None,
    "z0_ohm": 120.0,
    "velocity_factor": 0.7,
    "resistance_ohm_per_m": 0.0,
    "dielectric_loss_tangent": 0.0,
}


def _bus(**over):
    doc = {
        "bit_rate_bps": 1e6,
        "trunk_length_m": 100.0,
        "cable": LOSSLESS,
        "driver": {"source_ohm": 120.0, "rise_time_s": 10e-9, "open_circuit_v": 2.0},
        "nodes": [{"name": "far", "position_m": 100.0, "unit_loads": 1e-6, "input_capacitance_f": 0.0}],
        "terminations": [{"position_m": 100.0, "resistance_ohm": 120.0}],
    }
    doc.update(over)
    return build_bus(load_plan(doc))


def test_matched_line_is_a_pure_delay_of_half_the_source():
    # Source: closed form, lossless line matched at both ends: V_L / V_s = 1/2 * exp(-j w l / v)
    # (D. M. Pozar, Microwave Engineering, 4th ed., sec. 2.5, terminated lossless line with matched generator).
    bus = _bus()
    f = np.array([1e3, 1e6, 7.3e6, 30e6])
    resp = solve_bus(bus, f)
    v = 0.7 * SPEED_OF_LIGHT_M_PER_S
    expected = 0.5 * np.exp(-2j * np.pi * f * 100.0 / v)
    # the 12 GOhm receiver (1e-6 UL) is the only departure from the closed form: ~ 60 / 12e9 relative
    np.testing.assert_allclose(resp.transfer[0, :, 0], expected, rtol=1e-8)


def test_open_line_input_follows_the_lossless_line_impedance_formula():
    # Source: closed form, Z_in of an open lossless line = -j Z0 cot(beta l) (Pozar, 4th ed., eq. 2.45);
    # the source divider then gives V_in / V_oc = Z_in / (R_s + Z_in). Receiver at the driver end, no stub.
    bus = _bus(
        terminations=[],
        nodes=[
            {"name": "near", "position_m": 0.0, "unit_loads": 1e-6, "input_capacitance_f": 0.0},
            {"name": "far", "position_m": 100.0, "unit_loads": 1e-6, "input_capacitance_f": 0.0},
        ],
    )
    f = np.array([0.3e6, 1.1e6, 2.9e6])
    beta = 2 * np.pi * f / (0.7 * SPEED_OF_LIGHT_M_PER_S)
    z_in = -1j * 120.0 / np.tan(beta * 100.0)
    resp = solve_bus(bus, f)
    np.testing.assert_allclose(resp.transfer[0, :, 0], z_in / (120.0 + z_in), rtol=1e-6)
    # Source: closed form, open end V_L = V_in / cos(beta l) (Pozar, 4th ed., eq. 2.39 with Gamma_L = 1).
    np.testing.assert_allclose(resp.transfer[0, :, 1], z_in / (120.0 + z_in) / np.cos(beta * 100.0), rtol=1e-6)


def test_dc_solve_is_the_resistive_divider():
    # Source: closed form, Ohm's law: V = V_oc * R_load / (R_s + R_loop + R_load), R_loop = 2 * R' * l.
    cable = dict(LOSSLESS, resistance_ohm_per_m=0.0842)
    bus = _bus(cable=cable, nodes=[{"name": "far", "position_m": 100.0, "unit_loads": 1.0}])
    load = 1.0 / (1.0 / 120.0 + 1.0 / RX_OHM_PER_UL)
    expected = load / (120.0 + 2 * 0.0842 * 100.0 + load)
    np.testing.assert_allclose(dc_transfer(bus)[0, 0], expected, rtol=1e-12)


def test_unknown_driver_name_is_a_clear_error():
    bus = _bus()
    with pytest.raises(BusInputError) as err:
        solve_bus(bus, [1e6], driver_names=["far"])
    assert err.value.problems[0].field == "driver_name"


# --- scikit-rf as an independent route -------------------------------------------------------------------


def _tree_bus(cable: dict) -> Bus:
    """A trunk with the driver mid-bus, stubs of several lengths, parallel, RC and bias loads."""
    return build_bus(
        load_plan(
            {
                "bit_rate_bps": 1e6,
                "trunk_length_m": 200.0,
                "cable": cable,
                "driver": {"position_m": 30.0, "stub_length_m": 1.5, "transceiver": "edge-25ns"},
                "nodes": [
                    {"name": "west", "position_m": 0.0, "stub_length_m": 2.0},
                    {"name": "mid", "position_m": 80.0, "stub_length_m": 5.0, "input_capacitance_f": 30e-12},
                    {"name": "tap", "position_m": 150.0, "stub_length_m": 0.0, "unit_loads": 0.25},
                    {"name": "east", "position_m": 200.0, "stub_length_m": 1.0, "unit_loads": 0.125},
                ],
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": 120.0},
                    {"position_m": 200.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 2.2e-9},
                ],
                "bias": {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
            }
        )
    )


def _one_port(freq: skrf.Frequency, z_ohm: np.ndarray, name: str) -> skrf.Network:
    gamma = (z_ohm - 50.0) / (z_ohm + 50.0)
    return skrf.Network(frequency=freq, s=gamma.reshape(-1, 1, 1), z0=50.0, name=name)


def _skrf_transfer(bus: Bus, f: np.ndarray, driver_name: str | None = None) -> np.ndarray:
    """V_receiver / V_oc by scikit-rf's Circuit: the driver a port of impedance R_s, each receiver a port of
    impedance R_in (its C_in a separate shunt); all ports matched, so V_k / V_oc = S_k0 sqrt(z_k / z_0) / 2."""
    plan, cable = bus.plan, bus.cable
    freq = skrf.Frequency.from_f(f, unit="hz")
    media = DefinedGammaZ0(
        freq,
        z0_port=50.0,
        z0=characteristic_impedance_ohm(cable, f),
        gamma=propagation_constant_per_m(cable, f),
    )
    w = 2 * np.pi * f
    junction_pos = sorted(
        {0.0, plan.trunk_length_m, plan.driver.position_m}
        | {n.position_m for n in plan.nodes}
        | {t.position_m for t in plan.terminations}
        | {b.position_m for b in plan.bias}
    )
    junctions: dict[float, list] = {p: [] for p in junction_pos}
    connections: list[list] = []
    for i, (a, b) in enumerate(zip(junction_pos[:-1], junction_pos[1:], strict=True)):
        seg = media.line(b - a, unit="m", name=f"seg{i}")
        junctions[a].append((seg, 0))
        junctions[b].append((seg, 1))

    def hang(position_m: float, stub_m: float, items: list, tag: str) -> None:
        if stub_m == 0.0:
            junctions[position_m].extend(items)
            return
        stub = media.line(stub_m, unit="m", name=f"stub-{tag}")
        junctions[position_m].append((stub, 0))
        connections.append([(stub, 1), *items])

    z_src = bus.driver.source_ohm
    drv_port = Circuit.Port(freq, "drv", z0=z_src)
    if driver_name in (None, plan.driver.name):
        hang(plan.driver.position_m, plan.driver.stub_length_m, [(drv_port, 0)], "drv")
    else:  # the primary driver listens: its receiver, 20 pF (its class's input capacitance)
        r_own = RX_OHM_PER_UL / bus.driver_device.unit_loads
        r_drv = _one_port(freq, 1.0 / (1.0 / r_own + 1j * w * 20e-12), "rd")
        hang(plan.driver.position_m, plan.driver.stub_length_m, [(r_drv, 0)], "drv")
    ports = []
    for i, node in enumerate(plan.nodes):
        device = bus.devices[node.name]
        r_in = RX_OHM_PER_UL / device.unit_loads
        port = Circuit.Port(freq, f"rx{i}", z0=r_in)
        cap = _one_port(freq, 1.0 / (1j * w * device.input_capacitance_f), f"cin{i}")
        # the driving node's own receiver input is left out of the model while it drives
        items = [(drv_port, 0)] if node.name == driver_name else [(port, 0), (cap, 0)]
        hang(node.position_m, node.stub_length_m, items, f"n{i}")
        ports.append((port, r_in))
    for i, term in enumerate(plan.terminations):
        z = term.resistance_ohm + (1.0 / (1j * w * term.capacitance_f) if term.kind == "rc" else 0.0)
        junctions[term.position_m].append((_one_port(freq, z + 0 * w, f"term{i}"), 0))
    for k, bias in enumerate(plan.bias):
        z_bias = (bias.pull_up_ohm + bias.pull_down_ohm) + 0 * w
        junctions[bias.position_m].append((_one_port(freq, z_bias + 0j, f"bias{k}"), 0))
    connections = [items for items in junctions.values()] + connections
    circuit = Circuit(connections)
    s = circuit.network.s
    index = {name: k for k, name in enumerate(circuit.port_names)}
    out = np.empty((f.size, len(ports)), dtype=complex)
    for k, (port, r_in) in enumerate(ports):
        if plan.nodes[k].name == driver_name:
            # the driver's own terminal: V = sqrt(z) (a + b), a = V_oc / (2 sqrt(z)), so V / V_oc = (1 + S_00) / 2
            out[:, k] = (1.0 + s[:, index["drv"], index["drv"]]) / 2.0
            continue
        out[:, k] = s[:, index[port.name], index["drv"]] * np.sqrt(r_in / z_src) / 2.0
    return out


@pytest.mark.parametrize(
    "cable",
    [
        pytest.param(LOSSLESS, id="lossless"),
        # skin effect, dielectric loss and DC resistance all on
        pytest.param({"class_key": "pair-24awg-120"}, id="lossy-24awg"),
    ],
)
def test_tree_bus_matches_scikit_rf(cable):
    # Source: scikit-rf (Circuit of DefinedGammaZ0 lines, tee-free junctions), the same gamma and Z0.
    bus = _tree_bus(cable)
    f = np.geomspace(1e3, 60e6, 37)
    ours = solve_bus(bus, f).transfer[0]
    reference = _skrf_transfer(bus, f)
    np.testing.assert_allclose(ours, reference, rtol=1e-6, atol=1e-9)


def test_transceiver_driving_matches_scikit_rf_in_the_same_batch():
    # Source: scikit-rf Circuit as above, with node "mid" driving and the primary driver listening.
    cable = {"class_key": "pair-24awg-120"}
    doc = _tree_bus(cable).plan.model_dump(mode="json")
    doc["nodes"][1]["may_drive"] = True
    doc["nodes"][3]["may_drive"] = True
    bus = build_bus(load_plan(doc))
    f = np.geomspace(1e3, 60e6, 23)
    batch = solve_bus(bus, f, driver_names=["driver", "mid", "east"])
    assert batch.driver_names == ("driver", "mid", "east")
    for i, name in enumerate(batch.driver_names):
        reference = _skrf_transfer(bus, f, driver_name=name)
        np.testing.assert_allclose(batch.transfer[i], reference, rtol=1e-6, atol=1e-9, err_msg=name)


def _random_tree(seed: int) -> Bus:
    rng = np.random.default_rng(seed)
    length = float(np.round(rng.uniform(50.0, 600.0), 1))
    nodes = [
        {
            "name": f"n{i}",
            "position_m": float(np.round(rng.uniform(0.0, length), 1)),
            "stub_length_m": float(np.round(rng.choice([0.0, rng.uniform(0.1, 12.0)]), 2)),
            "unit_loads": float(rng.choice([1.0, 0.5, 0.25, 0.125])),
            "input_capacitance_f": float(rng.uniform(5e-12, 60e-12)),
        }
        for i in range(7)
    ]
    return build_bus(
        load_plan(
            {
                "bit_rate_bps": 500e3,
                "trunk_length_m": length,
                "cable": {"class_key": str(rng.choice(["pair-24awg-120", "cat5e-100", "pair-22awg-120"]))},
                "driver": {
                    "position_m": float(np.round(rng.uniform(0.0, length), 1)),
                    "stub_length_m": float(np.round(rng.uniform(0.0, 3.0), 2)),
                    "transceiver": "edge-10ns",
                },
                "nodes": nodes,
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": float(rng.uniform(90.0, 150.0))},
                    {"position_m": length, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9},
                ],
                "bias": {"position_m": length, "pull_up_ohm": 750.0, "pull_down_ohm": 750.0},
            }
        )
    )


@pytest.mark.parametrize("seed", [7, 8, 9])
def test_random_trees_match_scikit_rf(seed):
    # Source: scikit-rf Circuit as above, on seeded random trunks, stubs, loads and driver positions.
    bus = _random_tree(seed)
    f = np.geomspace(1e4, 40e6, 17)
    np.testing.assert_allclose(solve_bus(bus, f).transfer[0], _skrf_transfer(bus, f), rtol=1e-6, atol=1e-9)


def test_junction_voltages_on_a_matched_line_follow_the_travelling_wave():
    # Source: closed form, a matched lossless line carries one forward wave: V(x) / V_oc = 1/2 exp(-j beta x)
    # (Pozar, 4th ed., sec. 2.1).
    bus = _bus(nodes=[{"name": "tap", "position_m": 40.0, **{"unit_loads": 1e-6, "input_capacitance_f": 0.0}}])
    f = np.array([1e5, 3e6, 11e6])
    resp = solve_bus(bus, f, with_junctions=True)
    np.testing.assert_allclose(resp.junction_position_m, [0.0, 40.0, 100.0], rtol=1e-12)
    beta = 2 * np.pi * f / (0.7 * SPEED_OF_LIGHT_M_PER_S)
    expected = 0.5 * np.exp(-1j * beta[:, None] * resp.junction_position_m[None, :])
    np.testing.assert_allclose(resp.junction_transfer[0], expected, rtol=1e-8)
    np.testing.assert_allclose(resp.transfer[0, :, 0], resp.junction_transfer[0, :, 1], rtol=1e-12)


@pytest.mark.parametrize("bad", [-1.0, float("nan"), float("inf")])
def test_bad_frequency_is_a_clear_error(bad):
    with pytest.raises(BusInputError) as err:
        solve_bus(_bus(), [1e6, bad])
    assert err.value.problems[0].field == "frequency_hz"


def test_rc_terminator_is_open_and_bias_is_its_series_pair_at_dc():
    # Source: closed form: a capacitor blocks DC, so the RC terminator draws nothing; the bias network across
    # the pair is pull-up + pull-down in series through the supply (TI SLLA272 failsafe biasing). With a
    # 40 ohm driver: V = V_oc R / (40 + R), R = 24 kOhm (1 UL across the pair) || (560 + 560) ohm.
    bus = _bus(
        cable=dict(LOSSLESS),
        driver={"source_ohm": 40.0, "rise_time_s": 10e-9, "open_circuit_v": 2.0},
        nodes=[{"name": "far", "position_m": 100.0, "unit_loads": 1.0}],
        terminations=[{"position_m": 100.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9}],
        bias={"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
    )
    r_load = 1.0 / (1.0 / RX_OHM_PER_UL + 1.0 / 1120.0)
    np.testing.assert_allclose(dc_transfer(bus)[0, 0], r_load / (40.0 + r_load), rtol=1e-12)


@pytest.mark.parametrize("seed", [3, 4])
def test_transfer_between_two_transceivers_is_reciprocal(seed):
    # Source: reciprocity of linear passive networks, Z_ab = Z_ba (Pozar, Microwave Engineering, 4th ed.,
    # sec. 4.2): when the listening terminal is loaded by the same resistance as the driving source
    # (32 UL = 750 ohm across the pair, source 750 ohm), V_b when a drives equals V_a when b drives.
    doc = _random_tree(seed).plan.model_dump(mode="json")
    key = doc["default_device"]
    doc["driver"]["device"] = {"class_key": key, "source_ohm": RX_OHM_PER_UL / 32.0}
    for i in (1, 4):
        doc["nodes"][i].update(
            may_drive=True, device={"class_key": key, "unit_loads": 32.0, "input_capacitance_f": 0.0}
        )
    bus = build_bus(load_plan(doc))
    a, b = doc["nodes"][1]["name"], doc["nodes"][4]["name"]
    f = np.geomspace(1e3, 30e6, 13)
    resp = solve_bus(bus, f, driver_names=[a, b])
    np.testing.assert_allclose(resp.transfer[0, :, 4], resp.transfer[1, :, 1], rtol=1e-9)
