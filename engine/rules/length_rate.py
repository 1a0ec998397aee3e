"""Length versus bit rate: the length x rate rule of thumb and a loss limit for this cable.

The length checked is the longest cable path a signal travels: from any node that may drive (the primary
driver; on RS-485 also transceiver nodes) along its stub, the trunk and the receiver's stub.

1. "length.rate_rule": length (m) x rate (bit/s) <= 1e8, the trade's rule of thumb (100 kbit/s -> 1000 m,
   10 Mbit/s -> 10 m).
2. "length.loss": the longest path the cable's loss allows at the bit rate, the smaller of two published limits,
   so the limit runs on continuously across every rate:
   - the flat part of the TIA/EIA-422-B Annex A curve, 1200 m (4000 ft) on its 24 AWG reference cable
     (J. Axelson, Serial Port Complete, ch. 6), scaled by the cable's conductor resistance against 24 AWG
     (84.2 Ohm/km per conductor, ASTM B258): L_plateau = 1200 m x min(1, 84.2 mOhm/m / R');
   - the length at which the cable's exact attenuation at f = bit rate reaches 9 dB (the loss rule for RS-485
     on twisted pair, D. Glisic, EE Times 2008): alpha = Re(gamma) from engine.line.propagation_constant_per_m
     (skin effect and dielectric loss included), L_9dB = 9 dB / (8.686 alpha).
   At low rates L_9dB is far longer than the plateau, so the plateau decides; at high rates the 9 dB length
   does. The two limits are also stated apart: the plateau is a length no bit rate extends, the 9 dB length
   gives the highest rate for the path.
Tight bands (engine.rules.margins): both rules are TIGHT when the path as built, 10 % longer than drawn, would
break them. (Both limits are stated for the cable as tabulated and carry their own criteria's margin, so the
copper's warm corner is left to the DC level rule, which computes the level itself.)
The exact DC level at each receiver is what rule "signal.dc_level" checks.
"""

import functools
import math

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.line import propagation_constant_per_m
from pairline.engine.plan import ResolvedCable
from pairline.engine.rules.margins import band_verdict, long_run_factor
from pairline.engine.units import length_text

RATE_RULE_ID = "length.rate_rule"
LOSS_RULE_ID = "length.loss"
LENGTH_RATE_PRODUCT_M_BPS = 1e8  # common practice
LOSS_LIMIT_DB = 9.0  # D. Glisic, "Getting the most out of your twisted pair cable", EE Times, 2008
NEPER_DB = 20.0 / math.log(10.0)  # 8.686 dB per neper
PLATEAU_LENGTH_M = 1200.0  # TIA/EIA-422-B Annex A: 4000 ft on 24 AWG
REFERENCE_RESISTANCE_OHM_PER_M = 0.0842  # 24 AWG copper per conductor, ASTM B258
MIN_RATE_BPS = 50.0  # the plan's lowest bit rate
MAX_RATE_BPS = 100e6  # the plan's highest bit rate
RATE_SOURCE = (
    "length (m) x bit rate (bit/s) <= 1e8: common practice, a rule of thumb below the TIA/EIA-422-B Annex A curve"
)
LOSS_SOURCE = (
    "The 1200 m (4000 ft) plateau of the TIA/EIA-422-B Annex A length-vs-rate curve (24 AWG, ASTM B258 84.2 Ω/km) "
    "and attenuation <= 9 dB at f = bit rate (D. Glisic, 'Getting the most out of your twisted pair cable', EE Times "
    "2008), the smaller of the two; alpha = Re(sqrt(Z' Y')), D. M. Pozar, Microwave Engineering, eq. 2.5; tight "
    "band from engine.rules.margins"
)


def attenuation_np_per_m(bus: Bus, frequency_hz: float) -> float:
    """The cable's attenuation constant alpha = Re(gamma) at f in Np/m, gamma = sqrt(Z' Y').

    Source: D. M. Pozar, Microwave Engineering, 4th ed., eq. 2.5 (engine.line.propagation_constant_per_m).
    """
    return _attenuation_np_per_m(bus.cable, frequency_hz)


def _attenuation_np_per_m(cable: ResolvedCable, frequency_hz: float) -> float:
    return float(propagation_constant_per_m(cable, frequency_hz).real[0])


def plateau_length_m(bus: Bus) -> float:
    """The longest path at any bit rate: 1200 m x min(1, R'_24AWG / R'), the Annex A plateau scaled by resistance."""
    r_ohm_per_m = bus.cable.resistance_ohm_per_m
    if r_ohm_per_m <= REFERENCE_RESISTANCE_OHM_PER_M:
        return PLATEAU_LENGTH_M
    return PLATEAU_LENGTH_M * REFERENCE_RESISTANCE_OHM_PER_M / r_ohm_per_m


def line_loss_db(bus: Bus, frequency_hz: float, length_m: float) -> float:
    """Cable attenuation over length_m at frequency_hz in dB: 8.686 alpha L with the exact alpha = Re(gamma)."""
    return _cable_loss_db(bus.cable, frequency_hz, length_m)


def _cable_loss_db(cable: ResolvedCable, frequency_hz: float, length_m: float) -> float:
    return NEPER_DB * _attenuation_np_per_m(cable, frequency_hz) * length_m


def nine_db_length_m(bus: Bus, rate_bps: float) -> float:
    """The length at which the attenuation at f = rate reaches 9 dB."""
    per_m_db = line_loss_db(bus, rate_bps, 1.0)
    return LOSS_LIMIT_DB / per_m_db if per_m_db > 0.0 else math.inf


def loss_limit_length_m(bus: Bus, rate_bps: float) -> float:
    """Longest path rule "length.loss" allows at a bit rate: min(plateau, 9 dB length), continuous in the rate."""
    return min(plateau_length_m(bus), nine_db_length_m(bus, rate_bps))


def signal_path_m(bus: Bus) -> float:
    """Longest cable path from a node that may drive to another node that listens (stubs included)."""
    d = bus.plan.driver
    nodes = bus.plan.nodes
    x_m = np.array([d.position_m, *(n.position_m for n in nodes)])
    stub_m = np.array([d.stub_length_m, *(n.stub_length_m for n in nodes)])
    talks = np.array([True, *(n.may_drive for n in nodes)])
    path_m = np.abs(x_m[talks, None] - x_m[None, :]) + stub_m[talks, None] + stub_m[None, :]  # (n_talkers, n_points)
    path_m[np.arange(path_m.shape[0]), np.flatnonzero(talks)] = 0.0  # not to itself
    return float(path_m.max())


def loss_limited_rate_bps(bus: Bus, length_m: float, limit_db: float = LOSS_LIMIT_DB) -> float:
    """Highest bit rate at which the attenuation at f = rate over length_m stays within limit_db (bisection in
    log f), clamped to the plan's range of rates: continuous in the length. The plateau is a length limit no
    rate changes; it is stated apart (plateau_length_m). A function of the cable and the length alone, so it is
    kept across plans (an edit that leaves the longest path alone finds it known)."""
    return _loss_limited_rate_bps(bus.cable, length_m, limit_db)


@functools.lru_cache(maxsize=256)
def _loss_limited_rate_bps(cable: ResolvedCable, length_m: float, limit_db: float) -> float:
    def loss_db(frequency_hz: float) -> float:
        return _cable_loss_db(cable, frequency_hz, length_m)

    if loss_db(MAX_RATE_BPS) <= limit_db:
        return MAX_RATE_BPS
    if loss_db(MIN_RATE_BPS) > limit_db:
        return MIN_RATE_BPS
    lo, hi = math.log(MIN_RATE_BPS), math.log(MAX_RATE_BPS)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if loss_db(math.exp(mid)) <= limit_db:
            lo = mid
        else:
            hi = mid
    return math.exp(lo)


def max_bit_rate_bps(bus: Bus) -> float:
    """Highest bit rate both length rules allow for this bus's path: min(1e8 / length, the 9 dB-limited rate).
    A path beyond the plateau breaks "length.loss" at every rate; that limit is a length (plateau_length_m)."""
    length_m = signal_path_m(bus)
    if length_m <= 0.0:
        return MAX_RATE_BPS
    return min(LENGTH_RATE_PRODUCT_M_BPS / length_m, loss_limited_rate_bps(bus, length_m), MAX_RATE_BPS)


def check_length_vs_rate(bus: Bus) -> list[Finding]:
    """Two whole-bus findings: the length x rate rule and the longest path the cable's loss allows."""
    rate = bus.plan.bit_rate_bps
    length_m = signal_path_m(bus)
    rate_limit_m = LENGTH_RATE_PRODUCT_M_BPS / rate
    as_built_m = length_m * long_run_factor()
    rate_verdict = band_verdict(length_m <= rate_limit_m, as_built_m <= rate_limit_m)
    best_bps = max_bit_rate_bps(bus)
    plateau_m = plateau_length_m(bus)
    repeater = "or split the bus with a repeater (each segment gets its own length budget)"
    margin = long_run_factor()  # the fix aims where the rule holds, the path 10 % longer as built included
    rate_fix = (
        ""
        if rate_verdict is Verdict.HOLDS
        else f"Lower the bit rate to at most "
        f"{_rate_text(LENGTH_RATE_PRODUCT_M_BPS / max(length_m * margin, 1e-9), floor=True)}, or shorten the longest "
        f"path from {length_text(length_m)} to at most {length_text(rate_limit_m / margin)}, {repeater}."
    )
    beyond = (
        f" The path is beyond the {length_text(plateau_m)} the cable's loss allows at any rate (length.loss)."
        if length_m > plateau_m
        else ""
    )
    return [
        Finding(
            RATE_RULE_ID,
            "Longest signal path (length × bit rate <= 10^8 m·bit/s)",
            rate_verdict,
            length_m,
            rate_limit_m,
            "m",
            None,
            f"longest path x bit rate <= 1e8 m bit/s, i.e. <= {length_text(rate_limit_m)} at "
            f"{_rate_text(rate)}; tight when the path 10 % longer as built would exceed it",
            RATE_SOURCE,
            fix=rate_fix,
            detail=f"Longest path {length_text(length_m)}; length × rate is "
            f"{length_m * rate / LENGTH_RATE_PRODUCT_M_BPS:.2%} of 10^8 m·bit/s. Highest rate both length rules "
            f"allow for this path: {_rate_text(best_bps)}." + beyond,
            figures=(("max_bit_rate_bps", LENGTH_RATE_PRODUCT_M_BPS / max(length_m, 1e-9)),),
        ),
        _loss_finding(bus, length_m, repeater),
    ]


def _loss_finding(bus: Bus, length_m: float, repeater: str) -> Finding:
    """The path against min(plateau, 9 dB length) at the plan's rate; tight at the warm, as-built corner."""
    rate = bus.plan.bit_rate_bps
    plateau_m = plateau_length_m(bus)
    nine_db_m = nine_db_length_m(bus, rate)
    limit_m = min(plateau_m, nine_db_m)
    verdict = band_verdict(length_m <= limit_m, length_m * long_run_factor() <= limit_m)
    loss_db = line_loss_db(bus, rate, length_m)
    loss_rate = loss_limited_rate_bps(bus, length_m)
    by_plateau = plateau_m <= nine_db_m
    fix = ""
    if verdict is not Verdict.HOLDS:
        target_m = limit_m / long_run_factor()  # where the rule holds, the path 10 % longer as built included
        target_rate = loss_limited_rate_bps(bus, length_m * long_run_factor())
        steps = []
        if not by_plateau and target_rate < rate:
            steps.append(f"lower the bit rate to at most {_rate_text(target_rate, floor=True)}")
        steps.append(f"shorten the path to at most {length_text(target_m)}")
        steps.append("use a lower-loss pair (thicker gauge, e.g. 22 AWG)")
        fix = f"Bring the path ({length_text(length_m)}) inside the loss limit: " + ", ".join(steps) + f", {repeater}."
    deciding = (
        f"the TIA/EIA-422-B Annex A plateau, {length_text(plateau_m)} for this cable at any rate"
        if by_plateau
        else f"9 dB of attenuation at {_rate_text(rate).replace('bit/s', 'Hz')}"
    )
    return Finding(
        LOSS_RULE_ID,
        "Longest path against the cable's loss limit at this bit rate",
        verdict,
        length_m,
        limit_m,
        "m",
        None,
        "longest path <= min(1200 m x min(1, 84.2 mΩ/m / R'), the length of 9 dB attenuation at f = bit rate); "
        "tight when the path 10 % longer as built would exceed it",
        LOSS_SOURCE,
        fix=fix,
        detail=f"{bus.cable.label}: {bus.cable.resistance_ohm_per_m * 1e3:.1f} mΩ/m per conductor against 84.2 "
        f"mΩ/m for 24 AWG. Limit here: {length_text(limit_m)}, set by {deciding}; the plateau is "
        f"{length_text(plateau_m)}, the 9 dB length at this rate {length_text(nine_db_m)}. Over this path the "
        f"attenuation at f = bit rate is {loss_db:.1f} dB; rates up to {_rate_text(loss_rate, floor=True)} stay "
        "within 9 dB.",
        figures=(("max_bit_rate_bps", loss_rate), ("max_path_m", plateau_m)),
    )


def _rate_text(rate_bps: float, *, floor: bool = False) -> str:
    """A rate for people, 4 significant digits (115.2 kbit/s); floor=True rounds a limit down to 3 digits so
    that following a fix really fixes it."""
    digits = 3 if floor else 4
    if floor and rate_bps > 0.0:
        scale = 10.0 ** (math.floor(math.log10(rate_bps)) - digits + 1)
        rate_bps = math.floor(rate_bps / scale + 1e-9) * scale
    for scale, prefix in ((1e6, "M"), (1e3, "k")):
        if rate_bps >= scale:
            return f"{rate_bps / scale:.{digits}g} {prefix}bit/s"
    return f"{rate_bps:.{digits}g} bit/s"
