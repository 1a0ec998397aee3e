"""Length versus bit rate: the length x rate rule of thumb and a loss limit for this cable.

The length checked is the longest cable path a signal travels: from any node that may drive (the primary
driver; on RS-485 also transceiver nodes) along its stub, the trunk and the receiver's stub.

1. "length.rate_rule": length (m) x rate (bit/s) <= 1e8, the trade's rule of thumb (100 kbit/s -> 1000 m,
   10 Mbit/s -> 10 m). Over 80 % of it is tight (Pairline's own margin).
2. "length.loss": a loss limit in two regimes, split at 90 kbit/s where the TIA/EIA-422-B Annex A curve
   turns from its flat part to its falling part (J. Axelson, Serial Port Complete, ch. 6; TIA/EIA-422-B Annex A).
   - Below 90 kbit/s the Annex's length is flat at 1200 m (4000 ft) on its 24 AWG reference cable: at such
     rates the line is limited by its resistance, not by its attenuation at f = rate. The path is held
     against 1200 m scaled by the cable's conductor resistance against 24 AWG (84.2 Ohm/km per conductor,
     ASTM B258): L_max = 1200 m x min(1, 84.2 mOhm/m / R'). Over 90 % of it is tight (Pairline's margin).
   - From 90 kbit/s the cable's exact attenuation at f = bit rate, alpha = Re(gamma) from
     engine.line.propagation_constant_per_m (skin effect and dielectric loss included), loss_dB = 8.686 alpha L:
     over 9 dB breaks (the loss rule for RS-485 on twisted pair, D. Glisic, EE Times 2008); over 6 dB is
     tight (the 6 dB loss criterion quoted for the Annex A curve).
   The exact DC level at each receiver is what rule "signal.dc_level" checks.
"""

import math

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.line import propagation_constant_per_m
from pairline.engine.units import length_text

RATE_RULE_ID = "length.rate_rule"
LOSS_RULE_ID = "length.loss"
LENGTH_RATE_PRODUCT_M_BPS = 1e8  # common practice
TIGHT_FRACTION = 0.8  # Pairline's own margin on the rule of thumb
LOSS_LIMIT_DB = 9.0  # D. Glisic, "Getting the most out of your twisted pair cable", EE Times, 2008
LOSS_TIGHT_DB = 6.0  # loss criterion quoted for the TIA/EIA-422-B Annex A length-vs-rate curve
NEPER_DB = 20.0 / math.log(10.0)  # 8.686 dB per neper
PLATEAU_RATE_BPS = 90e3  # TIA/EIA-422-B Annex A: below it the curve is flat (J. Axelson, Serial Port Complete)
PLATEAU_LENGTH_M = 1200.0  # TIA/EIA-422-B Annex A: 4000 ft on 24 AWG
PLATEAU_TIGHT_FRACTION = 0.9  # Pairline's own margin on the plateau
REFERENCE_RESISTANCE_OHM_PER_M = 0.0842  # 24 AWG copper per conductor, ASTM B258
MIN_RATE_BPS = 50.0  # the plan's lowest bit rate
MAX_RATE_BPS = 100e6  # the plan's highest bit rate
RATE_SOURCE = (
    "length (m) x bit rate (bit/s) <= 1e8: common practice, a rule of thumb below the TIA/EIA-422-B Annex A curve"
)
LOSS_SOURCE = (
    "Below 90 kbit/s: the 1200 m (4000 ft) plateau of the TIA/EIA-422-B Annex A length-vs-rate curve (24 AWG, "
    "ASTM B258 84.2 Ω/km); from 90 kbit/s: attenuation <= 9 dB at f = bit rate, D. Glisic, 'Getting the most out "
    "of your twisted pair cable', EE Times 2008, and the 6 dB criterion of TIA/EIA-422-B Annex A; alpha = "
    "Re(sqrt(Z' Y')), D. M. Pozar, Microwave Engineering, eq. 2.5"
)


def attenuation_np_per_m(bus: Bus, frequency_hz: float) -> float:
    """The cable's attenuation constant alpha = Re(gamma) at f in Np/m, gamma = sqrt(Z' Y').

    Source: D. M. Pozar, Microwave Engineering, 4th ed., eq. 2.5 (engine.line.propagation_constant_per_m).
    """
    return float(propagation_constant_per_m(bus.cable, frequency_hz).real[0])


def plateau_length_m(bus: Bus) -> float:
    """Longest path below 90 kbit/s: 1200 m x min(1, R'_24AWG / R'), the Annex A plateau scaled by resistance."""
    r_ohm_per_m = bus.cable.resistance_ohm_per_m
    if r_ohm_per_m <= REFERENCE_RESISTANCE_OHM_PER_M:
        return PLATEAU_LENGTH_M
    return PLATEAU_LENGTH_M * REFERENCE_RESISTANCE_OHM_PER_M / r_ohm_per_m


def line_loss_db(bus: Bus, frequency_hz: float, length_m: float) -> float:
    """Cable attenuation over length_m at frequency_hz in dB: 8.686 alpha L with the exact alpha = Re(gamma)."""
    return NEPER_DB * attenuation_np_per_m(bus, frequency_hz) * length_m


def loss_limit_length_m(bus: Bus, rate_bps: float) -> float:
    """Longest path rule "length.loss" allows at a bit rate: the plateau below 90 kbit/s, else 9 dB / loss per m."""
    if rate_bps < PLATEAU_RATE_BPS:
        return plateau_length_m(bus)
    per_m_db = line_loss_db(bus, rate_bps, 1.0)
    return LOSS_LIMIT_DB / per_m_db if per_m_db > 0.0 else math.inf


def signal_path_m(bus: Bus) -> float:
    """Longest cable path from a node that may drive to another node that listens (stubs included)."""
    d = bus.plan.driver
    nodes = bus.plan.nodes
    x_m = np.array([d.position_m, *(n.position_m for n in nodes)])
    stub_m = np.array([d.stub_length_m, *(n.stub_length_m for n in nodes)])
    talks = np.array([True, *(n.role == "transceiver" for n in nodes)])
    path_m = np.abs(x_m[talks, None] - x_m[None, :]) + stub_m[talks, None] + stub_m[None, :]  # (n_talkers, n_points)
    path_m[np.arange(path_m.shape[0]), np.flatnonzero(talks)] = 0.0  # not to itself
    return float(path_m.max())


def loss_limited_rate_bps(bus: Bus, length_m: float, limit_db: float = LOSS_LIMIT_DB) -> float | None:
    """Highest bit rate the loss rule allows over length_m; None when no rate does (the path is longer than the
    plateau). Below 90 kbit/s the plateau decides; from 90 kbit/s the attenuation at f = rate stays within limit_db
    (bisection in log f). MAX_RATE_BPS when the highest rate stays within it.
    """
    if length_m > plateau_length_m(bus):
        return None
    if line_loss_db(bus, PLATEAU_RATE_BPS, length_m) > limit_db:
        return PLATEAU_RATE_BPS
    if line_loss_db(bus, MAX_RATE_BPS, length_m) <= limit_db:
        return MAX_RATE_BPS
    lo, hi = math.log(PLATEAU_RATE_BPS), math.log(MAX_RATE_BPS)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if line_loss_db(bus, math.exp(mid), length_m) <= limit_db:
            lo = mid
        else:
            hi = mid
    return math.exp(lo)


def max_bit_rate_bps(bus: Bus) -> float | None:
    """Highest bit rate both rules allow on this bus: min(1e8 / length, loss-limited rate); None when the path is
    too long for any rate."""
    length_m = signal_path_m(bus)
    if length_m <= 0.0:
        return MAX_RATE_BPS
    loss_rate = loss_limited_rate_bps(bus, length_m)
    if loss_rate is None:
        return None
    return min(LENGTH_RATE_PRODUCT_M_BPS / length_m, loss_rate, MAX_RATE_BPS)


def check_length_vs_rate(bus: Bus) -> list[Finding]:
    """Two whole-bus findings: the length x rate rule and the cable loss at f = bit rate."""
    rate = bus.plan.bit_rate_bps
    length_m = signal_path_m(bus)
    rate_limit_m = LENGTH_RATE_PRODUCT_M_BPS / rate
    rate_verdict = (
        Verdict.BREAKS
        if length_m > rate_limit_m
        else Verdict.TIGHT
        if length_m > TIGHT_FRACTION * rate_limit_m
        else Verdict.HOLDS
    )
    best_bps = max_bit_rate_bps(bus)
    repeater = "or split the bus with a repeater (each segment gets its own length budget)"
    rate_fix = (
        ""
        if rate_verdict is Verdict.HOLDS
        else f"Lower the bit rate to at most {_rate_text(LENGTH_RATE_PRODUCT_M_BPS / max(length_m, 1e-9), floor=True)}"
        ", "
        f"or shorten the longest path from {length_text(length_m)} to at most "
        f"{length_text(rate_limit_m)}, {repeater}."
    )
    loss_rate = loss_limited_rate_bps(bus, length_m)
    if rate < PLATEAU_RATE_BPS:
        loss_finding = _plateau_finding(bus, length_m, repeater)
    else:
        loss_finding = _attenuation_finding(bus, length_m, loss_rate, repeater)
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
            f"{_rate_text(rate)}; over {TIGHT_FRACTION:.0%} of it is tight",
            RATE_SOURCE,
            fix=rate_fix,
            detail=f"Longest path {length_text(length_m)}; length × rate is "
            f"{length_m * rate / LENGTH_RATE_PRODUCT_M_BPS:.2%} of 10^8 m·bit/s. Highest rate both length rules "
            "allow here: "
            + ("no rate: the trunk is too long for these rules." if best_bps is None else f"{_rate_text(best_bps)}."),
        ),
        loss_finding,
    ]


def _plateau_finding(bus: Bus, length_m: float, repeater: str) -> Finding:
    """Below 90 kbit/s: the path against the Annex A plateau, 1200 m scaled by the cable's resistance."""
    limit_m = plateau_length_m(bus)
    verdict = (
        Verdict.BREAKS
        if length_m > limit_m
        else Verdict.TIGHT
        if length_m > PLATEAU_TIGHT_FRACTION * limit_m
        else Verdict.HOLDS
    )
    target_m = limit_m if verdict is Verdict.BREAKS else PLATEAU_TIGHT_FRACTION * limit_m
    fix = ""
    if verdict is not Verdict.HOLDS:
        thicker = (
            ", use a pair of lower resistance (24 AWG or thicker)"
            if bus.cable.resistance_ohm_per_m > REFERENCE_RESISTANCE_OHM_PER_M
            else ""
        )
        fix = (
            f"Shorten the longest path from {length_text(length_m)} to at most "
            f"{length_text(target_m)}{thicker}, {repeater}."
        )
    return Finding(
        LOSS_RULE_ID,
        "Longest path against the low-rate length limit (TIA/EIA-422-B Annex A plateau)",
        verdict,
        length_m,
        limit_m,
        "m",
        None,
        f"below {_rate_text(PLATEAU_RATE_BPS)} the longest path <= 1200 m x min(1, 84.2 mΩ/m / R') = "
        f"{length_text(limit_m)} for this cable; over {PLATEAU_TIGHT_FRACTION:.0%} of it is tight",
        LOSS_SOURCE,
        fix=fix,
        detail=f"{bus.cable.label}: {bus.cable.resistance_ohm_per_m * 1e3:.1f} mΩ/m per conductor against 84.2 "
        f"mΩ/m for 24 AWG. At these rates the curve is flat: the loop resistance, not the attenuation at "
        f"f = bit rate, limits the run (the DC level at each receiver is rule signal.dc_level). Over this path the "
        f"attenuation at {_rate_text(bus.plan.bit_rate_bps).replace('bit/s', 'Hz')} is "
        f"{line_loss_db(bus, bus.plan.bit_rate_bps, length_m):.1f} dB, for information.",
    )


def _attenuation_finding(bus: Bus, length_m: float, loss_rate: float | None, repeater: str) -> Finding:
    """From 90 kbit/s: the exact attenuation at f = bit rate over the path, 9 dB breaks, 6 dB tight."""
    rate = bus.plan.bit_rate_bps
    loss = line_loss_db(bus, rate, length_m)
    verdict = Verdict.BREAKS if loss > LOSS_LIMIT_DB else Verdict.TIGHT if loss > LOSS_TIGHT_DB else Verdict.HOLDS
    alpha = attenuation_np_per_m(bus, rate)
    max_len_m = LOSS_LIMIT_DB / (NEPER_DB * alpha) if alpha > 0 else math.inf
    fix = ""
    if verdict is not Verdict.HOLDS:
        target_db = LOSS_LIMIT_DB if verdict is Verdict.BREAKS else LOSS_TIGHT_DB
        target_rate = loss_limited_rate_bps(bus, length_m, target_db)
        target_len_m = target_db / (NEPER_DB * alpha) if alpha > 0 else math.inf
        steps = []
        if target_rate is not None and 0.0 < target_rate < rate:
            steps.append(f"lower the bit rate to at most {_rate_text(target_rate, floor=True)}")
        steps.append(f"shorten the path to at most {length_text(target_len_m)}")
        steps.append("use a lower-loss pair (thicker gauge, e.g. 22 AWG)")
        fix = (
            f"Bring the loss ({loss:.1f} dB over {length_text(length_m)}) under {target_db:g} dB: "
            + ", ".join(steps)
            + f", {repeater}."
        )
    return Finding(
        LOSS_RULE_ID,
        "Cable loss over the longest path at f = bit rate",
        verdict,
        loss,
        LOSS_LIMIT_DB,
        "dB",
        None,
        f"from {_rate_text(PLATEAU_RATE_BPS)}: attenuation Re(γ) at f = bit rate over the longest path <= "
        f"{LOSS_LIMIT_DB:g} dB; over {LOSS_TIGHT_DB:g} dB is tight",
        LOSS_SOURCE,
        fix=fix,
        detail=f"alpha {alpha * 1e3:.3f} mNp/m at {_rate_text(rate).replace('bit/s', 'Hz')} "
        f"({bus.cable.label}); 9 dB is reached at {length_text(max_len_m)} at this rate; " + _loss_rate_text(loss_rate),
    )


def _loss_rate_text(loss_rate_bps: float | None) -> str:
    if loss_rate_bps is None:
        return "no rate: the path is longer than the low-rate length limit."
    if loss_rate_bps >= MAX_RATE_BPS:
        return "at this length every rate up to 100 Mbit/s stays within 9 dB."
    return f"at this length rates up to {_rate_text(loss_rate_bps, floor=True)} stay within 9 dB."


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
