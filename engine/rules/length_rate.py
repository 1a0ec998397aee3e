"""Length versus bit rate: the length x rate rule of thumb and a loss limit for this cable.

The length checked is the longest cable path a signal travels: from any node that may drive (the primary
driver; on RS-485 also transceiver nodes) along its stub, the trunk and the receiver's stub.

1. "length.rate_rule": length (m) x rate (bit/s) <= 1e8, the trade's rule of thumb (100 kbit/s -> 1000 m,
   10 Mbit/s -> 10 m). Over 80 % of it is tight (Pairline's own margin).
2. "length.loss": the cable's attenuation over that length at f = bit rate, from the closed form for a
   low-loss line

       alpha = R(f) / (2 Z0) + G(f) Z0 / 2   [Np/m],   loss_dB = 20 log10(e) alpha L,

   with R(f) the pair's loop resistance 2 R' raised by skin effect, R_dc max(1, sqrt(f / f_onset)), and
   G(f) = 2 pi f C' tan(delta). Over 9 dB breaks (the loss rule for RS-485 on twisted pair, D. Glisic,
   EE Times 2008); over 6 dB is tight (the 6 dB loss criterion quoted for the TIA/EIA-422-B Annex A curve).
   The closed form is the high-frequency approximation (valid where R << 2 pi f L, above about 100 kHz on
   24 AWG). Below that it is not the line's attenuation constant Re(gamma), which falls towards 0 with f, but
   it stays close to and above the DC insertion loss between Z0 terminations, ln(1 + R L / 2 Z0) Np against
   R L / 2 Z0 Np (1150 m of 24 AWG: 5.1 dB against 7.0 dB), so the rule is conservative at low rates. The exact
   DC level at each receiver is what rule "signal.dc_level" checks.
"""

import math

import numpy as np

from engine.bus import Bus
from engine.findings import Finding, Verdict

RATE_RULE_ID = "length.rate_rule"
LOSS_RULE_ID = "length.loss"
LENGTH_RATE_PRODUCT_M_BPS = 1e8  # common practice
TIGHT_FRACTION = 0.8  # Pairline's own margin on the rule of thumb
LOSS_LIMIT_DB = 9.0  # D. Glisic, "Getting the most out of your twisted pair cable", EE Times, 2008
LOSS_TIGHT_DB = 6.0  # loss criterion quoted for the TIA/EIA-422-B Annex A length-vs-rate curve
NEPER_DB = 20.0 / math.log(10.0)  # 8.686 dB per neper
MIN_RATE_BPS = 50.0  # the plan's lowest bit rate
MAX_RATE_BPS = 100e6  # the plan's highest bit rate
RATE_SOURCE = (
    "length (m) x bit rate (bit/s) <= 1e8: common practice, a rule of thumb below the TIA/EIA-422-B Annex A curve"
)
LOSS_SOURCE = (
    "Attenuation <= 9 dB at f = bit rate: D. Glisic, 'Getting the most out of your twisted pair cable', EE Times "
    "2008; 6 dB loss criterion: TIA/EIA-422-B Annex A; alpha = R/(2 Z0) + G Z0/2: low-loss transmission-line "
    "theory (e.g. D. M. Pozar, Microwave Engineering, sec. 2.7)"
)


def loop_resistance_ohm_per_m(bus: Bus, frequency_hz: float) -> float:
    """Series resistance of the pair per metre of run at f: 2 R' max(1, sqrt(f / f_onset))."""
    r_dc = 2.0 * bus.cable.resistance_ohm_per_m
    onset = bus.cable.skin_effect_onset_hz
    if onset is None or frequency_hz <= onset:
        return r_dc
    return r_dc * math.sqrt(frequency_hz / onset)


def attenuation_np_per_m(bus: Bus, frequency_hz: float) -> float:
    """Low-loss attenuation constant: alpha = R(f) / (2 Z0) + G(f) Z0 / 2, G = 2 pi f C' tan(delta)."""
    z0 = bus.cable.z0_ohm
    g_siemens_per_m = 2.0 * math.pi * frequency_hz * bus.cable.capacitance_f_per_m * bus.cable.dielectric_loss_tangent
    return loop_resistance_ohm_per_m(bus, frequency_hz) / (2.0 * z0) + g_siemens_per_m * z0 / 2.0


def loss_db(bus: Bus, frequency_hz: float, length_m: float) -> float:
    """Cable attenuation over length_m at frequency_hz in dB: 8.686 alpha L."""
    return NEPER_DB * attenuation_np_per_m(bus, frequency_hz) * length_m


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


def loss_limited_rate_bps(bus: Bus, length_m: float, limit_db: float = LOSS_LIMIT_DB) -> float:
    """Highest bit rate whose attenuation at f = rate stays within limit_db over length_m (bisection in log f).

    Returns 0.0 when even the lowest rate exceeds the limit, MAX_RATE_BPS when the highest stays within it.
    """
    if loss_db(bus, MIN_RATE_BPS, length_m) > limit_db:
        return 0.0
    if loss_db(bus, MAX_RATE_BPS, length_m) <= limit_db:
        return MAX_RATE_BPS
    lo, hi = math.log(MIN_RATE_BPS), math.log(MAX_RATE_BPS)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if loss_db(bus, math.exp(mid), length_m) <= limit_db:
            lo = mid
        else:
            hi = mid
    return math.exp(lo)


def max_bit_rate_bps(bus: Bus) -> float:
    """Highest bit rate both rules allow on this bus: min(1e8 / length, loss-limited rate at 9 dB)."""
    length_m = signal_path_m(bus)
    if length_m <= 0.0:
        return MAX_RATE_BPS
    return min(LENGTH_RATE_PRODUCT_M_BPS / length_m, loss_limited_rate_bps(bus, length_m), MAX_RATE_BPS)


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
        f"or shorten the longest path from {length_m:.0f} m to at most {rate_limit_m:.0f} m, {repeater}."
    )
    loss = loss_db(bus, rate, length_m)
    loss_verdict = Verdict.BREAKS if loss > LOSS_LIMIT_DB else Verdict.TIGHT if loss > LOSS_TIGHT_DB else Verdict.HOLDS
    loss_rate = loss_limited_rate_bps(bus, length_m)
    alpha = attenuation_np_per_m(bus, rate)
    max_len_m = LOSS_LIMIT_DB / (NEPER_DB * alpha) if alpha > 0 else math.inf
    loss_fix = ""
    if loss_verdict is not Verdict.HOLDS:
        target_db = LOSS_LIMIT_DB if loss_verdict is Verdict.BREAKS else LOSS_TIGHT_DB
        target_rate = loss_limited_rate_bps(bus, length_m, target_db)
        target_len_m = target_db / (NEPER_DB * alpha)
        steps = []
        if 0.0 < target_rate < rate:
            steps.append(f"lower the bit rate to at most {_rate_text(target_rate, floor=True)}")
        steps.append(f"shorten the path to at most {target_len_m:.0f} m")
        steps.append("use a lower-loss pair (thicker gauge, e.g. 22 AWG)")
        loss_fix = (
            f"Bring the loss ({loss:.1f} dB over {length_m:.0f} m) under {target_db:g} dB: "
            + ", ".join(steps)
            + f", {repeater}."
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
            f"longest path x bit rate <= 1e8 m bit/s, i.e. <= {rate_limit_m:.0f} m at {_rate_text(rate)}; "
            f"over {TIGHT_FRACTION:.0%} of it is tight",
            RATE_SOURCE,
            fix=rate_fix,
            detail=f"Longest path {length_m:.1f} m; length × rate is {length_m * rate / LENGTH_RATE_PRODUCT_M_BPS:.2%} "
            f"of 10^8 m·bit/s. Highest rate both length rules allow here: {_rate_text(best_bps)}.",
        ),
        Finding(
            LOSS_RULE_ID,
            "Cable loss over the longest path at f = bit rate",
            loss_verdict,
            loss,
            LOSS_LIMIT_DB,
            "dB",
            None,
            f"attenuation at f = bit rate over the longest path <= {LOSS_LIMIT_DB:g} dB; over "
            f"{LOSS_TIGHT_DB:g} dB is tight",
            LOSS_SOURCE,
            fix=loss_fix,
            detail=f"alpha {alpha * 1e3:.3f} mNp/m at {_rate_text(rate).replace('bit/s', 'Hz')} "
            f"({bus.cable.label}); 9 dB is reached at {max_len_m:.0f} m at this rate; " + _loss_rate_text(loss_rate),
        ),
    ]


def _loss_rate_text(loss_rate_bps: float) -> str:
    if loss_rate_bps <= 0.0:
        return "at this length even the lowest rate loses more than 9 dB."
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
