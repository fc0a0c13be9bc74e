"""The summary margins: worst phase margin, upper and lower gain margins, modulus and delay margins."""

from __future__ import annotations

from netloop.analysis.results import GainCrossover, Margins, PhaseCrossover

__all__ = ["summarise_margins", "worst_crossover"]


def worst_crossover(gain_crossovers: tuple[GainCrossover, ...]) -> GainCrossover | None:
    """The gain crossover with the smallest phase margin (the first of equals), whose margin is the loop's; None without one."""
    return min(gain_crossovers, key=lambda c: c.phase_margin_deg, default=None)


def summarise_margins(
    gain_crossovers: tuple[GainCrossover, ...],
    phase_crossovers: tuple[PhaseCrossover, ...],
    stable: bool,
    modulus: tuple[float, float],
) -> Margins:
    """Reduce the crossovers to the summary margins (see Margins for each field's meaning).

    A stable loop changes stability exactly where a change of gain puts -1 on the curve, so its
    upper gain margin is the nearest phase crossover below 0 dB and its lower gain margin the
    nearest one above 0 dB. For an unstable loop the upper figure is the usual signed one at the
    phase crossover nearest 0 dB, and there is no lower gain margin.
    """
    pm = fc = None
    worst = worst_crossover(gain_crossovers)
    if worst is not None:
        pm, fc = worst.phase_margin_deg, worst.freq_hz
    gm = f_gm = lgm = f_lgm = None
    if stable:
        upper = [c for c in phase_crossovers if c.kind == "upper"]
        lower = [c for c in phase_crossovers if c.kind == "lower"]
        if upper:
            c = min(upper, key=lambda c: c.gain_margin_db)
            gm, f_gm = c.gain_margin_db, c.freq_hz
        if lower:
            c = min(lower, key=lambda c: c.gain_db)
            lgm, f_lgm = c.gain_db, c.freq_hz
    elif phase_crossovers:
        c = min(phase_crossovers, key=lambda c: abs(c.gain_db))
        gm, f_gm = c.gain_margin_db, c.freq_hz
    delays = [c.delay_margin_s for c in gain_crossovers if c.delay_margin_s is not None]
    return Margins(
        phase_margin_deg=pm,
        unity_gain_hz=fc,
        gain_margin_db=gm,
        phase_crossover_hz=f_gm,
        lower_gain_margin_db=lgm,
        lower_phase_crossover_hz=f_lgm,
        modulus_margin=modulus[0],
        modulus_freq_hz=modulus[1],
        delay_margin_s=min(delays) if delays else None,
    )
