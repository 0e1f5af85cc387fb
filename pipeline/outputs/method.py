"""The words the workbook and the report share: the caution, the method and the priority formula.

The priority score's formula is written here once, with the run's weights; the
inventory SQL (``sql/inventory.sql``) computes exactly this, and the report, the
workbook's Method sheet and the header note of ``priority_score`` all show it.
"""

from __future__ import annotations

from ..core.units import OutputUnits

CAUTION_TEXT = ("Screening results only. Every finding must be confirmed by field survey and by a licensed engineer "
                "before any decision; local design codes and agency policy govern over the published criteria "
                "used here.")


def priority_formula(cfg) -> str:
    """The priority score's formula with the run's weights.

    Parameters
    ----------
    cfg : Config
        The run's settings (``inventory.priority_weights``, ``inventory.hazard_weight``).

    Returns
    -------
    str
        ``priority_score = 100 * h * hidden + 100 * (w_s * f_shortfall + w_v * f_speed
        + w_e * f_exposure) / (w_s + w_v + w_e)`` with the weights filled in.

    Notes
    -----
    The score ranks the deficient stretches: the weighted mean of the three
    factors of :func:`priority_terms` (each in 0-1) scaled to 0-100, plus
    ``100 * h`` points where the crest hides a hazard.
    """
    w, h = cfg["inventory.priority_weights"], cfg["inventory.hazard_weight"]
    return (f"priority_score = 100 * {h:g} * hidden + 100 * ({w['shortfall']:g} * f_shortfall + {w['speed']:g} * "
            f"f_speed + {w['exposure']:g} * f_exposure) / {sum(w.values()):g}")


def priority_terms(cfg) -> str:
    """What the terms of the priority formula are.

    Parameters
    ----------
    cfg : Config
        The run's settings (``inventory.aadt_ref``, the reference traffic).

    Returns
    -------
    str
        The definitions of ``hidden``, ``f_shortfall``, ``f_speed`` and ``f_exposure``.

    Notes
    -----
    ``f_shortfall = shortfall / SSD``, ``f_speed = (V - V_supported) / 50 km/h`` and
    ``f_exposure = ln(1 + AADT) / ln(1 + AADT_ref)``, each capped at 1.
    """
    units = run_units(cfg)
    return ("hidden = 1 where the crest hides a hazard (hidden_hazard not 'none'), else 0; f_shortfall = shortfall / "
            f"required SSD; f_speed = (speed judged at - supported speed) / {_speed(50.0, units)}; "
            f"f_exposure = ln(1 + AADT) / ln(1 + {cfg['inventory.aadt_ref']:g}), 0 where AADT is unknown; "
            "each factor at most 1")


def run_units(cfg) -> OutputUnits:
    """The output units of a run (``output.units``, ``output.us_foot``).

    Parameters
    ----------
    cfg : Config
        The run's settings.

    Returns
    -------
    OutputUnits
        Metric, or US customary in the foot asked for.
    """
    return OutputUnits(cfg["output.units"], cfg["output.us_foot"])


def _speed(kmh: float, units: OutputUnits) -> str:
    """A speed (km/h) in the output units, with its unit: whole km/h, or mph to 0.1."""
    return f"{kmh:g} km/h" if not units.us else f"{units.speed(kmh):.1f} mph"


def _length(metres: float, units: OutputUnits) -> str:
    """A length (m) in the output units, with its unit: as given in m, or ft to 0.1."""
    return f"{metres:g} m" if not units.us else f"{units.length(metres):.1f} {units.length_label}"


def _in_set_units(cs, units: OutputUnits) -> bool:
    """True where the criteria set is tabulated in the run's output units (so its values print as
    published)."""
    return cs.metric != units.us


def _set_length(value: float, cs, units: OutputUnits, digits: int = 2) -> str:
    """A length in the criteria set's own unit, as published where the set is in the output units,
    else converted (to ``digits`` decimals)."""
    if _in_set_units(cs, units):
        return f"{value:g}"
    return f"{units.length(value * cs.length_to_m):.{digits}f}"


def _set_speed(value: float, cs, units: OutputUnits) -> str:
    """A speed in the criteria set's own unit, as published or converted (to 0.1)."""
    if _in_set_units(cs, units):
        return f"{value:g}"
    return f"{units.speed(value * cs.speed_to_kmh):.1f}"


def design_values_text(cs, units: OutputUnits) -> str:
    """The criteria set's table of design values, in the run's units.

    Parameters
    ----------
    cs : CriteriaSet
        The run's criteria set (:mod:`pipeline.evaluate.criteria`).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    str
        ``"<speed> <unit>: SSD <ssd> <unit>, K crest <k>, sag <k>"`` for every tabulated speed,
        the values exactly as the table holds them where the set is in the run's units, else
        converted (and said so).
    """
    t = cs.table.sort_values("speed")
    su, lu = units.speed_label, units.length_label
    rows = "; ".join(f"{_set_speed(r.speed, cs, units)} {su}: SSD {_set_length(r.ssd_design, cs, units, 1)} {lu}, "
                     f"K crest {_set_length(r.crest_k, cs, units, 1)}, sag {_set_length(r.sag_k, cs, units, 1)}"
                     for r in t.itertuples())
    how = ("as tabulated" if _in_set_units(cs, units)
           else f"converted from the set's {'metric' if cs.metric else 'US customary'} values")
    return (f"the tool's own criteria table for {cs.name} (see: sightaudit criteria {cs.name}), {how}; K in "
            f"{lu} per % of grade change: {rows}")


def method_lines(result, cfg) -> list[tuple[str, str]]:
    """The method and criteria, as (heading, text) lines for the workbook and the report.

    Parameters
    ----------
    result : NetworkResult
        The run's result; its criteria set gives the source, heights and braking.
    cfg : Config
        The run's settings (profile step, grade adjustment, severity bands, priority).

    Returns
    -------
    list of (str, str)
        The caution first, then the criteria set with its table of design values and
        what of it was checked against the publication, the method of each stage, the
        severity bands and the priority formula; lengths and speeds in the run's output
        units (``output.units``), the set's values as tabulated where the set is in them.

    Notes
    -----
    The alignment is recovered by optimal segmentation with model selection by
    the Bayesian information criterion; sight distance follows the line-of-sight
    and headlight models of the AASHTO Green Book, chapter 3.

    References
    ----------
    .. [1] Jackson, B. et al. (2005). An algorithm for optimal partitioning of data
       on an interval. IEEE Signal Processing Letters 12(2), 105-108.
    .. [2] Killick, R., Fearnhead, P. and Eckley, I. A. (2012). Optimal detection of
       changepoints with a linear computational cost. JASA 107(500), 1590-1598.
    .. [3] Schwarz, G. (1978). Estimating the dimension of a model. Annals of
       Statistics 6(2), 461-464.
    .. [4] AASHTO. A Policy on Geometric Design of Highways and Streets, chapter 3.
    """
    cs = result.criteria
    c = cs.params
    units = run_units(cfg)
    bands = cfg["inventory.severity_bands_kmh"]
    lu = units.length_label
    return [
        ("Caution", CAUTION_TEXT),
        ("Criteria set", f"{c['name']}: {c['title']}"),
        ("Source", str(c["source"])),
        ("Edition", str(c["edition"])),
        ("Design values", design_values_text(cs, units)),
        ("Checked against the publication", str(c["source_marks"])),
        ("Heights", f"eye {_set_length(c['eye_height'], cs, units)}, object "
                    f"{_set_length(c['object_height'], cs, units)}, headlight "
                    f"{_set_length(c['headlight_height'], cs, units)} ({lu}); headlight beam "
                    f"{c['beam_angle_deg']:g} degree(s) upward"),
        ("Braking", f"reaction time {c['reaction_time_s']:g} s, deceleration "
                    f"{_set_length(c['deceleration'], cs, units)} {lu}/s2"),
        ("Required SSD", "design SSD of the criteria table at a tabulated speed; between rows the set's formula "
                         "rounded up to its step" + (" on the grade of each station" if cfg["criteria.grade_adjusted"]
                                                     else " (level road, as the K tables assume)")),
        ("Profile", f"ground elevation every {_length(cfg['profile.step_m'], units)} along each centreline"),
        ("Alignment", "tangents and symmetric parabolic curves recovered from the profile: optimal "
                      "segmentation (Jackson et al. 2005; Killick et al. 2012), model selection by the Bayesian "
                      "information criterion (Schwarz 1978), joint nonlinear least squares"),
        ("Sight distance", "on the recovered alignment, both directions: line of sight from eye to object over "
                           "crests, headlight reach on sags (AASHTO Green Book ch. 3); checked against the "
                           "closed-form expressions"),
        ("Deficient", "a curve whose available sight distance is below the required SSD in either direction; "
                      "K below the table is reported separately (k_below_table)"),
        ("Severity", f"supported speed below the speed judged at by less than {_speed(bands[0], units)}: minor; "
                     f"{_speed(bands[0], units).split()[0]} to {_speed(bands[1], units)}: moderate; more than "
                     f"{_speed(bands[1], units)}: severe"),
        ("Priority score", f"{priority_formula(cfg)}; {priority_terms(cfg)}"),
    ]


def data_quality_facts(dq: dict | None, units) -> list[tuple[str, str]]:
    """What the ground data can support, as (label, text) pairs in the run's units, for the
    report and the workbook alike.

    Parameters
    ----------
    dq : dict or None
        The run's data-quality statement (:func:`pipeline.evaluate.quality.data_quality`).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    list of (str, str)
        Ground spacing, shortest feature resolved, vertical error (stated or assumed), scatter
        about the fit, share of curves and of road length judged with high confidence; empty
        without a statement. The sentences on what the data cannot judge are ``dq["cannot_judge"]``.
    """
    if not dq:
        return []
    L, E = units.length, units.length_label

    def known(value, text):
        return text if value is not None else None

    kind = "DEM cell" if dq["ground_kind"] == "dem" else "ground-point spacing"
    facts = [
        (kind, known(dq["spacing_m"], lambda: f"{L(dq['spacing_m']):.1f} {E}"), "unknown"),
        ("shortest feature resolved", known(dq["resolution_m"], lambda: f"{L(dq['resolution_m']):.0f} {E}"),
         "unknown"),
        ("vertical error of the ground data", known(dq.get("vertical_error_m"), lambda:
         f"{L(dq['vertical_error_m']):.2f} {E}, {units.text(dq['vertical_error_basis'])}"), "not stated"),
        ("estimated ground error about the fit", known(dq["noise_sd_m"], lambda:
         f"{L(dq['noise_sd_m']):.2f} {E} (correlation from station to station {dq['noise_rho']:.2f})"), "no curves"),
        ("curves judged with high confidence", known(dq["curves_high_pct"], lambda:
         f"{dq['curves_high_pct']:.0f} % of {dq['curves']}; undetermined {dq['curves_undetermined_pct']:.0f} %"),
         "no curves"),
        ("road length all of whose curves are judged with high confidence", known(dq["km_high_pct"], lambda:
         f"{dq['km_high_pct']:.0f} %"), "none evaluated"),
    ]
    return [(label, text() if text else missing) for label, text, missing in facts]
