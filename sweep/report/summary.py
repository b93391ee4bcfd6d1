"""Where each strategy wins: Markdown and CSV tables built from a cube alone.

Nothing here recomputes physics: every figure is read, counted or located in the Dataset,
so an old ``.nc`` file summarizes the same way it did when it was written. The cube is read by
label, one body at a time (:func:`sweep.report.selection.one_body`), and the strategies are the
cube's own: every column, header and sentence about a challenger is made for each strategy the
cube names besides the reference (direct).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import NamedTuple

import numpy as np
import pandas as pd
import xarray as xr

from sweep.atomic import replacing
from sweep.model.strategies import REFERENCE, crossover_variable, cube_labels, lookup
from sweep.report.format import km, speed
from sweep.report.selection import (
    array,
    body_label,
    challenger_names,
    count_values,
    lowest_periapsis_below,
    one_body,
    strategy_labels,
)

__all__ = ["SECTIONS", "Section", "answers", "escape_markdown", "render_summary", "summary_tables", "write_summary"]

_MAX_ROWS = 12  # periapsis rows shown per Markdown table; the CSV has them all
_DAY = 86400.0  # s
_TARGET_PERIAPSIS = ("target_altitude", "periapsis_altitude")
_SPEED_PERIAPSIS = ("v_inf", "periapsis_altitude")  # one target's slice of the grid, as the tables read it
# The finite-burn section's short answer follows this strategy (the low dive), where the cube has it.
_DIVE = "two_burn"
# How each strategy makes a plane change, in the plane-change section's heading; others say their registry entry's.
_TURNS = {"direct": "direct turns with its burn", "two_burn": "two_burn splits the turn",
          "three_burn": "three_burn splits the turn over its burns, with an apoapsis chosen for it"}
_TWO_BURN_SPLIT = "two_burn_first_plane_change"  # the cube variable of two_burn's turn at its first burn


# Characters that start Markdown (CommonMark, GitHub tables) markup anywhere in a line; each is escaped with a
# backslash, which CommonMark allows before any ASCII punctuation. "-", "+", "=", "." and digits start markup
# only at the beginning of a line, where no escaped text is put.
_MARKDOWN_SPECIAL = set("\\`*_{}[]<>()#!|~&$")


def escape_markdown(text: object) -> str:
    r"""
    ``text`` as literal Markdown: special characters backslash-escaped, line breaks as spaces.

    For text from the config or the cube (body names, the description, the config's name and
    path) placed into summary.md, so that ``a|b*_c`` neither splits a table nor turns italic.

    Examples
    --------
    >>> escape_markdown("a|b*_c")
    'a\\|b\\*\\_c'
    """
    flat = " ".join(str(text).splitlines())
    return "".join(f"\\{c}" if c in _MARKDOWN_SPECIAL else c for c in flat)


def _win_runs(best: np.ndarray, v_inf: np.ndarray, names: list[str]) -> list[tuple[str, float, float]]:
    """Runs of one winner along the v_inf axis: (strategy or 'none', first v_inf, last v_inf)."""
    runs: list[tuple[str, float, float]] = []
    for value, at in zip(best, v_inf, strict=True):
        label = names[int(value)] if value >= 0 else "none"
        if runs and runs[-1][0] == label:
            runs[-1] = (label, runs[-1][1], float(at))
        else:
            runs.append((label, float(at), float(at)))
    return runs


def _crossovers(cube: xr.Dataset, names: list[str], *dims: str, finite: bool = False) -> dict[str, np.ndarray]:
    """
    Each named strategy's crossover speeds in a one-body cube, with dimensions ``dims``; NaN
    (no crossover) for a strategy whose crossover variable the cube lacks.
    """
    shape = tuple(cube.sizes[d] for d in dims)
    return {n: array(cube, crossover_variable(n, finite), *dims) if crossover_variable(n, finite) in cube
            else np.full(shape, np.nan) for n in names}


def _crossover_columns(names: list[str]) -> list[str]:
    return [f"{n}_crossover_v_inf_km_s" for n in names]


def summary_tables(dataset: xr.Dataset) -> dict[str, pd.DataFrame]:
    """
    The summary's tables.

    Returns
    -------
    dict of DataFrame
        ``wins``: runs of one winner along v_inf per body, target and periapsis;
        ``crossover``: equal-cost arrival speeds, one column per challenger of direct; ``shares``:
        the share of feasible grid points each strategy wins and its largest saving over direct,
        with where it occurs.
    """
    bodies, names = cube_labels(dataset)
    challengers = challenger_names(names)
    v_inf = dataset["v_inf"].values
    periapses = dataset["periapsis_altitude"].values
    wins, crossover, shares = [], [], []
    for body in bodies:
        cube = one_body(dataset, body)
        crossing = _crossovers(cube, challengers, *_TARGET_PERIAPSIS)
        for t, target in enumerate(dataset["target_altitude"].values):
            here = cube.isel(target_altitude=t)  # one target at a time: memory is v_inf x periapsis, any grid
            best = array(here, "best_strategy", *_SPEED_PERIAPSIS)
            saving = array(here, "saving_over_direct", *_SPEED_PERIAPSIS)
            for p, periapsis in enumerate(periapses):
                for label, start, stop in _win_runs(best[:, p], v_inf, names):
                    wins.append((body, target, periapsis, label, start, stop))
                crossover.append((body, target, periapsis, *(float(crossing[n][t, p]) for n in challengers)))
            feasible = int((best >= 0).sum())
            for code, name in enumerate(names):
                mask = best == code
                count = int(mask.sum())
                row = [body, target, name, count, count / feasible if feasible else np.nan]
                if count and name != REFERENCE:
                    where = np.where(mask, saving, -np.inf)
                    v, p = np.unravel_index(np.argmax(where), where.shape)
                    at = {"v_inf": v, "periapsis_altitude": p}
                    row += [saving[v, p], float(here["propellant_saving"].isel(at)), v_inf[v], float(periapses[p]),
                            float(here["time_to_orbit"].isel({**at, "strategy": code})) / _DAY]
                else:
                    row += [0.0 if count else np.nan, 0.0 if count else np.nan, np.nan, np.nan, np.nan]
                shares.append(row)
    tables = {
        "wins": pd.DataFrame(wins, columns=["body", "target_altitude_km", "periapsis_altitude_km",
                                            "strategy", "v_inf_from_km_s", "v_inf_to_km_s"]),
        "crossover": pd.DataFrame(crossover, columns=["body", "target_altitude_km", "periapsis_altitude_km",
                                                      *_crossover_columns(challengers)]),
        "shares": pd.DataFrame(shares, columns=["body", "target_altitude_km", "strategy", "points_won",
                                                "share_of_feasible", "max_saving_m_s", "max_propellant_saving_kg",
                                                "at_v_inf_km_s", "at_periapsis_altitude_km",
                                                "at_time_to_orbit_days"]),
    }
    if "finite_delta_v" in dataset:
        tables.update(_finite_tables(dataset))
    if "plane_change_delta_v" in dataset:
        tables["plane_change"] = _plane_change_table(dataset)
    return tables


def _plane_change_table(dataset: xr.Dataset) -> pd.DataFrame:
    """Per body, target and plane change: share won, median cost of the turn, median two_burn split (if any)."""
    bodies, names = cube_labels(dataset)
    split_known = _TWO_BURN_SPLIT in dataset
    turn = (*_SPEED_PERIAPSIS, "plane_change")
    rows = []
    for body in bodies:
        cube = one_body(dataset, body)
        for t, target in enumerate(dataset["target_altitude"].values):
            here = cube.isel(target_altitude=t)  # one target at a time: memory is v_inf x periapsis x angle
            best = array(here, "plane_change_best_strategy", *turn)
            # least cost over the strategies, with and without the turn
            with_turn = np.fmin.reduce(array(here, "plane_change_delta_v", "strategy", *turn), axis=0)
            coplanar = np.fmin.reduce(array(here, "delta_v", "strategy", *_SPEED_PERIAPSIS), axis=0)
            share = array(here, _TWO_BURN_SPLIT, *turn) if split_known else None
            for i, angle in enumerate(dataset["plane_change"].values):
                block = best[..., i]
                feasible = int((block >= 0).sum())
                cost = (with_turn[..., i] - coplanar)
                cost = cost[np.isfinite(cost)]
                row = [body, target, angle]
                row += [(block == s).sum() / feasible if feasible else np.nan for s in range(len(names))]
                row.append(float(np.median(cost)) if cost.size else np.nan)
                if split_known:
                    split = share[..., i]
                    split = split[np.isfinite(split)]
                    row.append(float(np.median(split)) if split.size else np.nan)
                rows.append(row)
    return pd.DataFrame(rows, columns=["body", "target_altitude_km", "plane_change_deg",
                                       *[f"share_won_{n}" for n in names], "median_cost_of_turn_m_s",
                                       *(["median_two_burn_first_share_deg"] if split_known else [])])


# Why a strategy feasible with impulsive burns does not fly with finite ones (finite_status names).
_NOT_FLOWN = ("engine_cannot_capture", "propellant_exhausted", "surface_impact", "below_safe_altitude", "aim_not_met")


def _finite_tables(dataset: xr.Dataset) -> dict[str, pd.DataFrame]:
    """Finite-burn crossovers per periapsis and thrust; wins, losses, trims and failures per thrust."""
    bodies, names = cube_labels(dataset)
    challengers = challenger_names(names)
    meanings = dataset["finite_status"].attrs["flag_meanings"].split()
    reasons = [name for name in _NOT_FLOWN if name in meanings]
    thrusts, ratios = dataset["thrust"].values, dataset["thrust_to_weight"].values
    finite = ("strategy", *_SPEED_PERIAPSIS, "thrust")
    crossing, losses = [], []
    for body in bodies:
        cube = one_body(dataset, body)
        speeds = _crossovers(cube, challengers, *_TARGET_PERIAPSIS, "thrust", finite=True)
        for t, target in enumerate(dataset["target_altitude"].values):
            here = cube.isel(target_altitude=t)  # one target at a time: memory is v_inf x periapsis x thrust
            loss = (here["finite_delta_v"] - here["delta_v"]).transpose(*finite).values
            trim = (array(here, "trim_delta_v", *finite) if "trim_delta_v" in here
                    else np.full(loss.shape, np.nan))
            best = array(here, "finite_best_strategy", *_SPEED_PERIAPSIS, "thrust")
            status = array(here, "finite_status", *finite)
            for f, thrust in enumerate(thrusts):
                for p, periapsis in enumerate(dataset["periapsis_altitude"].values):
                    crossing.append((body, target, periapsis, thrust, ratios[f],
                                     *(float(speeds[n][t, p, f]) for n in challengers)))
                block = best[..., f]
                decided = int((block >= 0).sum())  # points where at least one strategy flies
                for s, name in enumerate(names):
                    values = loss[s, ..., f]
                    flown = values[np.isfinite(values)]
                    trims = trim[s, ..., f][np.isfinite(trim[s, ..., f])]
                    counts = [int((status[s, ..., f] == meanings.index(r)).sum()) for r in reasons]
                    won = int((block == s).sum())
                    losses.append((body, target, thrust, ratios[f], name, won, decided, int(flown.size),
                                   won / decided if decided else np.nan,
                                   float(np.median(flown)) if flown.size else np.nan,
                                   float(flown.max()) if flown.size else np.nan,
                                   float(np.median(trims)) if trims.size else np.nan,
                                   float(trims.max()) if trims.size else np.nan,
                                   sum(counts) / status[s, ..., f].size, *counts))
    return {
        "finite_crossover": pd.DataFrame(crossing, columns=[
            "body", "target_altitude_km", "periapsis_altitude_km", "thrust_n", "thrust_to_weight",
            *_crossover_columns(challengers)]),
        "finite_losses": pd.DataFrame(losses, columns=[
            "body", "target_altitude_km", "thrust_n", "thrust_to_weight", "strategy", "points_won",
            "points_any_flown", "points_flown", "share_of_feasible", "median_gravity_loss_m_s",
            "max_gravity_loss_m_s", "median_trim_m_s", "max_trim_m_s", "share_engine_limited",
            *(f"points_{r}" for r in reasons)]),
    }


def _orbit_name(cube: xr.Dataset, t: int) -> str:
    """'400 km circular orbit', or '400 x 20,000 km orbit' for an elliptical target (one-body cube)."""
    target = float(cube["target_altitude"].values[t])
    if "target_apoapsis_altitude" not in cube:
        return f"{km(target)} circular orbit"
    apoapsis = float(cube["target_apoapsis_altitude"].isel(target_altitude=t))
    return f"{target:,.0f} x {km(apoapsis)} orbit (periapsis x apoapsis altitude)"


def _rows_to_show(count: int) -> list[int]:
    if count <= _MAX_ROWS:
        return list(range(count))
    return sorted({int(round(i)) for i in np.linspace(0, count - 1, _MAX_ROWS)})


def _status_lines(cube: xr.Dataset, names: list[str]) -> list[str]:
    meanings = cube["status"].attrs["flag_meanings"].split()
    lines = []
    for name in names:
        counts = count_values(cube["status"].sel(strategy=name), len(meanings))  # block by block
        total = counts.sum()
        parts = [f"{meanings[c]} {n / total:.0%}" for c, n in enumerate(counts) if c != 0 and n]
        if parts:
            lines.append(f"- `{name}` infeasible at part of the grid: {', '.join(parts)}.")
    return lines


def _against_direct(cube: xr.Dataset, name: str, t: int, p: int) -> str:
    """How challenger ``name`` compares with direct along v_inf at target ``t`` and periapsis ``p`` (one body)."""
    variable = crossover_variable(name)
    if variable not in cube:
        return f"`{name}`: no crossover speeds in the cube"
    at = {"target_altitude": t, "periapsis_altitude": p}
    cross = float(cube[variable].isel(at))
    attrs = cube[variable].attrs
    searched = f"{attrs.get('valid_min')} to {attrs.get('valid_max')} km/s"
    if np.isfinite(cross):
        return f"`{name}` beats direct above {cross:.2f} km/s"
    delta_v = cube["delta_v"].isel(at)
    if (int(cube["status"].sel(strategy=name).isel(v_inf=0, **at)) == 0
            and bool((delta_v.sel(strategy=name) < delta_v.sel(strategy=REFERENCE)).all())):
        return f"`{name}` beats direct at every arrival speed ({searched} searched)"
    return f"`{name}` does not beat direct between {searched}"


def _answer(cube: xr.Dataset, t: int, shares: pd.DataFrame) -> str:
    """One plain-language sentence pair for a body (one-body cube) and target altitude."""
    body, target = body_label(cube), cube["target_altitude"].values[t]
    challengers = challenger_names(strategy_labels(cube))
    here = shares[(shares.body == body) & (shares.target_altitude_km == target)].set_index("strategy")
    if here["points_won"].sum() == 0:
        return f"For a {km(target)} orbit no strategy is feasible on this grid (see the status lines)."
    sentences = []
    p = lowest_periapsis_below(cube, challengers, t)
    if p is not None:
        lowest = f"with periapsis at {km(cube['periapsis_altitude'].values[p])} (the lowest feasible on the grid), "
        sentences.append(lowest + ", ".join(_against_direct(cube, name, t, p) for name in challengers))
    saving = here.drop(index=REFERENCE)["max_saving_m_s"]
    if saving.notna().any() and saving.max() > 0:
        name = saving.idxmax()
        row = here.loc[name]
        sentences.append(
            f"the largest saving over direct is {row.max_saving_m_s:.0f} m/s ({row.max_propellant_saving_kg:.0f} kg "
            f"of propellant) with `{name}` at {row.at_v_inf_km_s:g} km/s and periapsis "
            f"{km(row.at_periapsis_altitude_km)}, reaching orbit {row.at_time_to_orbit_days:.1f} days after arrival"
        )
    else:
        sentences.append("direct capture is never beaten on this grid")
    won = ", ".join(f"`{name}` {share:.0%}" for name, share in here["share_of_feasible"].items() if share > 0)
    return f"For a {km(target)} orbit: " + "; ".join(sentences) + f". Share of feasible points won: {won}."


def answers(dataset: xr.Dataset, tables: dict[str, pd.DataFrame] | None = None) -> dict[str, list[str]]:
    """Plain-language answer per body: one sentence group per target altitude."""
    tables = tables or summary_tables(dataset)
    bodies, _ = cube_labels(dataset)
    targets = range(dataset.sizes["target_altitude"])
    return {body: [_answer(one_body(dataset, body), t, tables["shares"]) for t in targets] for body in bodies}


def _finite_section(cube: xr.Dataset, tables: dict[str, pd.DataFrame], t: int) -> list[str]:
    """How the answer moves with thrust (one-body cube): crossovers at the lowest feasible periapsis, wins, losses."""
    names = strategy_labels(cube)
    body, target = body_label(cube), float(cube["target_altitude"].values[t])
    periapses = cube["periapsis_altitude"].values
    dive = lowest_periapsis_below(cube, [_DIVE], t) if _DIVE in names else None
    losses = tables["finite_losses"]
    here = losses[(losses.body == body) & (losses.target_altitude_km == target)]
    lines = ["With finite burns (aimed to end on the target orbit; gravity losses and the impulsive trim that "
             "closes the aim included; see the model in the cube's attributes):", ""]
    header = ("| thrust | T/W | points won of those any strategy flies: " + " / ".join(names)
              + " | median (max) loss incl. trim, m/s: " + " / ".join(names)
              + " | max trim, m/s | not flown (cannot capture, out of propellant, surface, below safe altitude, "
              "aim not met): " + " / ".join(names) + " |")
    lines += [header, "|---:|---:|---|---|---|---|"]
    sentences = []
    for f, thrust in enumerate(cube["thrust"].values):
        rows = here[here.thrust_n == thrust].set_index("strategy").loc[names]
        ratio = float(cube["thrust_to_weight"].values[f])
        decided = int(rows.points_any_flown.iloc[0])
        won = " / ".join(f"{int(w):,}" for w in rows.points_won) + f" of {decided:,}"
        loss = " / ".join("-" if not np.isfinite(m) else f"{m:.0f} ({x:.0f})"
                          for m, x in zip(rows.median_gravity_loss_m_s, rows.max_gravity_loss_m_s, strict=True))
        trim = float(np.nanmax(rows.max_trim_m_s.to_numpy(dtype=float), initial=-np.inf))
        trim_text = "-" if not np.isfinite(trim) else f"{trim:.2f}"
        counts = [c for c in rows.columns if c.startswith("points_") and c not in
                  ("points_won", "points_any_flown", "points_flown")]
        failed = " / ".join(", ".join(f"{int(row[c]):,}" for c in counts) for _, row in rows.iterrows())
        lines.append(f"| {thrust:,.0f} N | {ratio:.3g} | {won} | {loss} | {trim_text} | {failed} |")
        if dive is not None:
            at = {"target_altitude": t, "periapsis_altitude": dive}
            finite = float(cube[crossover_variable(_DIVE, finite=True)].isel(at).isel(thrust=f))
            impulsive = float(cube[crossover_variable(_DIVE)].isel(at))
            text = (f"pays above {finite:.2f} km/s" if np.isfinite(finite)
                    else "has no crossover with direct within the grid's speeds")
            sentences.append(f"at T/W {ratio:.3g} ({thrust:,.0f} N) `{_DIVE}` with periapsis {km(periapses[dive])} "
                             f"{text} (impulsive: {speed(impulsive)})")
    lines.append("")
    if sentences:
        lines += ["In short: " + "; ".join(sentences) + ".", ""]
    lines.append("Not flown: grid points (speed x periapsis) where the strategy is feasible with impulsive burns but "
                 "its finite-burn sequence, aimed as well as it can be and split over periapsis passes where that "
                 "helps, cannot capture before leaving the sphere of influence, runs out of propellant, meets the "
                 "surface, passes below the body's lowest safe periapsis altitude, or ends so far from the target "
                 "that the trim would itself be a long burn. Max trim: the largest impulsive clean-up the aim left, "
                 "over all strategies.")
    lines.append("")
    return lines


def _turn_phrase(name: str) -> str:
    """How strategy ``name`` makes the plane change, for the section's heading."""
    if name in _TURNS:
        return _TURNS[name]
    entry = lookup(name)
    return f"{name} turns {entry.turn_how}" if entry else f"{name}: turn not described by this version's registry"


def _plane_change_section(table: pd.DataFrame, body: str, target: float, names: list[str]) -> list[str]:
    here = table[(table.body == body) & (table.target_altitude_km == target)]
    split_known = "median_two_burn_first_share_deg" in table
    lines = ["With a plane change (" + ", ".join(_turn_phrase(n) for n in names) + "):", "",
             "| plane change | points won: " + " / ".join(names) + " | median cost of the turn |"
             + (" median two_burn turn at its first burn |" if split_known else ""),
             "|---:|---|---:|" + ("---:|" if split_known else "")]
    for row in here.itertuples(index=False):
        won = " / ".join("-" if not np.isfinite(v) else f"{v:.0%}"
                         for v in (getattr(row, f"share_won_{n}") for n in names))
        cost = "-" if not np.isfinite(row.median_cost_of_turn_m_s) else f"{row.median_cost_of_turn_m_s:.0f} m/s"
        cells = [f"{row.plane_change_deg:g} deg", won, cost]
        if split_known:
            cells.append("-" if not np.isfinite(row.median_two_burn_first_share_deg) else
                         f"{row.median_two_burn_first_share_deg:.2f} deg")
        lines.append("| " + " | ".join(cells) + " |")
    return lines + ["", "Cost of the turn: least delta-v with the plane change minus least delta-v without it.", ""]


class Section(NamedTuple):
    """A part of each target's section in summary.md, for the cubes it ``applies`` to."""

    name: str
    applies: Callable[[xr.Dataset, dict[str, pd.DataFrame]], bool]  # (whole cube, tables)
    render: Callable[[xr.Dataset, dict[str, pd.DataFrame], int], list[str]]  # (one body's cube, tables, target index)


def _plane_change_lines(cube: xr.Dataset, tables: dict[str, pd.DataFrame], t: int) -> list[str]:
    return _plane_change_section(tables["plane_change"], body_label(cube), float(cube["target_altitude"].values[t]),
                                 strategy_labels(cube))


# The registry of optional sections, in the order they follow each target's winner table.
SECTIONS: list[Section] = [
    Section("finite", lambda dataset, tables: "finite_delta_v" in dataset, _finite_section),
    Section("plane_change", lambda dataset, tables: "plane_change" in tables, _plane_change_lines),
]


def render_summary(dataset: xr.Dataset, tables: dict[str, pd.DataFrame] | None = None,
                   figures: list[tuple[str, str, str]] | None = None) -> str:
    """
    Markdown report: per body and target, where each strategy wins and by how much.

    ``figures``: (body, file name, title) of PNG files beside the summary, shown in each body's
    section; none by default.
    """
    tables = tables or summary_tables(dataset)
    bodies, names = cube_labels(dataset)
    challengers = challenger_names(names)
    sentences = answers(dataset, tables)
    v_inf = dataset["v_inf"].values
    periapses = dataset["periapsis_altitude"].values
    points = int(np.prod([dataset.sizes[d] for d in dataset["best_strategy"].dims]))
    lines = [
        f"# {escape_markdown(dataset.attrs.get('title', 'capsweep summary'))}",
        "",
        f"> **Caution.** {dataset.attrs.get('comment', '')}",
        "",
        f"{escape_markdown(dataset.attrs.get('summary', ''))}",
        "",
        f"Grid: {len(bodies)} bodies x {v_inf.size} arrival speeds ({v_inf[0]:g} to {v_inf[-1]:g} km/s) x "
        f"{dataset.sizes['target_altitude']} target altitudes x {periapses.size} periapsis altitudes "
        f"({periapses[0]:g} to {periapses[-1]:g} km) = {points:,} points, {len(names)} strategies each. "
        f"Produced by {escape_markdown(dataset.attrs.get('source', 'capsweep'))}; "
        f"{escape_markdown(dataset.attrs.get('history', ''))}.",
        "",
        *([f"Ties: {escape_markdown(dataset['best_strategy'].attrs['ranking'])}.", ""]
          if "ranking" in dataset["best_strategy"].attrs else []),
        "Strategies: " + dataset.attrs.get("strategies", ""),
        "",
    ]
    for body in bodies:
        cube = one_body(dataset, body)
        crossing = _crossovers(cube, challengers, *_TARGET_PERIAPSIS)
        lines += [
            f"## {escape_markdown(body.capitalize())}",
            "",
            f"GM {float(cube['body_gm']):.6g} m3/s2, mean radius {float(cube['body_radius']):,.1f} km, "
            f"lowest safe periapsis {float(cube['body_safe_periapsis_altitude']):g} km, sphere of influence "
            f"{float(cube['sphere_of_influence_radius']):,.0f} km, apoapsis bound "
            f"{float(cube['apoapsis_bound']):,.0f} km.",
            "",
        ]
        for _, name, title in [f for f in figures or [] if f[0] == body]:
            # file names are made of [a-z0-9._-] (figures.common.safe): a link destination as they are
            lines += [f"![{escape_markdown(title)}]({name})", ""]
        for t in range(dataset.sizes["target_altitude"]):
            lines += [f"### {escape_markdown(body.capitalize())}, {_orbit_name(cube, t)}", "",
                      sentences[body][t], ""]
            shown = _rows_to_show(periapses.size)
            lines += ["| periapsis | winner along v_inf (km/s) |" + "".join(f" {n} = direct at |" for n in challengers),
                      "|---:|---|" + "---:|" * len(challengers)]
            best = array(cube.isel(target_altitude=t, periapsis_altitude=shown), "best_strategy", *_SPEED_PERIAPSIS)
            for i, p in enumerate(shown):
                runs = _win_runs(best[:, i], v_inf, names)
                text = "; ".join(f"{label} {start:g}-{stop:g}" for label, start, stop in runs)
                lines.append(f"| {km(periapses[p])} | {text} |"
                             + "".join(f" {speed(crossing[n][t, p])} |" for n in challengers))
            if len(shown) < periapses.size:
                lines.append(f"\n(showing {len(shown)} of {periapses.size} periapsis altitudes; all are in wins.csv)")
            lines.append("")
            for section in SECTIONS:
                if section.applies(dataset, tables):
                    lines += section.render(cube, tables, t)
        lines += _status_lines(cube, names) + [""]
    lines += [
        "## How to read this",
        "",
        "Winner: the feasible strategy with the least total delta-v at that grid point; `none` where no "
        "strategy is feasible. Crossover speeds are roots of the model's cost difference, not grid "
        "values. Files beside this one: wins.csv, crossover.csv, shares.csv (and, with a thrust axis, "
        "finite_crossover.csv and finite_losses.csv)" + (", and the PNG figures shown above" if figures else "")
        + ". Gravity loss: finite-burn delta-v minus impulsive delta-v for the same strategy and point.",
        "",
        f"**Caution.** {dataset.attrs.get('comment', '')}",
        "",
    ]
    return "\n".join(lines)


def write_summary(dataset: xr.Dataset, folder: str | Path, figure_folder: str | Path | None = None,
                  tables: dict[str, pd.DataFrame] | None = None) -> list[Path]:
    """
    Write summary.md and the CSV tables into ``folder``; return the paths written.

    The figures of :func:`sweep.report.figures.write_figures` already in ``figure_folder``
    (default ``folder``) are linked from summary.md (write them first); missing ones are left
    out. ``tables``: :func:`summary_tables` of ``dataset`` where the caller has them already.
    Every table and the text are rendered before the first file is written, so a failure
    while rendering writes nothing; each file is whole or absent (:func:`sweep.atomic.replacing`).
    """
    from sweep.report.figures import figure_files  # here, not above: matplotlib loads only when a summary is written

    folder = Path(folder)
    figure_folder = Path(figure_folder) if figure_folder is not None else folder
    tables = tables if tables is not None else summary_tables(dataset)
    figures = [figure for figure in figure_files(dataset) if (figure_folder / figure[1]).is_file()]
    texts = {f"{name}.csv": table.to_csv(index=False, float_format="%.6g") for name, table in tables.items()}
    texts = {"summary.md": render_summary(dataset, tables, figures), **texts}
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, text in texts.items():
        with replacing(folder / name) as temporary:
            temporary.write_text(text, encoding="utf-8")
        written.append(folder / name)
    return written
