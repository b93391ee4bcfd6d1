"""Where each strategy wins: Markdown and CSV tables built from a cube alone.

Nothing here recomputes physics: every figure is read, counted or located in the Dataset,
so an old ``.nc`` file summarizes the same way it did when it was written.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from sweep.atomic import replacing
from sweep.model.strategies import crossover_variable, cube_labels

__all__ = ["answers", "render_summary", "summary_tables", "write_summary"]

_MAX_ROWS = 12  # periapsis rows shown per Markdown table; the CSV has them all
_DAY = 86400.0  # s


def _win_runs(best: np.ndarray, v_inf: np.ndarray, names: list[str]) -> list[tuple[str, float, float]]:
    """Runs of one winner along the v_inf axis: (strategy or 'none', first v_inf, last v_inf)."""
    runs: list[tuple[str, float, float]] = []
    for value, speed in zip(best, v_inf, strict=True):
        label = names[int(value)] if value >= 0 else "none"
        if runs and runs[-1][0] == label:
            runs[-1] = (label, runs[-1][1], float(speed))
        else:
            runs.append((label, float(speed), float(speed)))
    return runs


def summary_tables(dataset: xr.Dataset) -> dict[str, pd.DataFrame]:
    """
    The summary's tables.

    Returns
    -------
    dict of DataFrame
        ``wins``: runs of one winner along v_inf per body, target and periapsis;
        ``crossover``: equal-cost arrival speeds; ``shares``: the share of feasible grid
        points each strategy wins and its largest saving over direct, with where it occurs.
    """
    bodies, names = cube_labels(dataset)
    v_inf = dataset["v_inf"].values
    best = dataset["best_strategy"].values
    saving = dataset["saving_over_direct"].values
    propellant = dataset["propellant_saving"].values
    time = dataset["time_to_orbit"].values
    wins, crossover, shares = [], [], []
    for b, body in enumerate(bodies):
        for t, target in enumerate(dataset["target_altitude"].values):
            for p, periapsis in enumerate(dataset["periapsis_altitude"].values):
                for label, start, stop in _win_runs(best[b, :, t, p], v_inf, names):
                    wins.append((body, target, periapsis, label, start, stop))
                crossover.append((
                    body, target, periapsis,
                    float(dataset["crossover_v_inf"].values[b, t, p]),
                    float(dataset["three_burn_crossover_v_inf"].values[b, t, p]),
                ))
            block = best[b, :, t, :]
            feasible = int((block >= 0).sum())
            for code, name in enumerate(names):
                mask = block == code
                count = int(mask.sum())
                row = [body, target, name, count, count / feasible if feasible else np.nan]
                if count and name != "direct":
                    where = np.where(mask, saving[b, :, t, :], -np.inf)
                    v, p = np.unravel_index(np.argmax(where), where.shape)
                    row += [saving[b, v, t, p], propellant[b, v, t, p], v_inf[v],
                            float(dataset["periapsis_altitude"].values[p]), time[code, b, v, t, p] / _DAY]
                else:
                    row += [0.0 if count else np.nan, 0.0 if count else np.nan, np.nan, np.nan, np.nan]
                shares.append(row)
    tables = {
        "wins": pd.DataFrame(wins, columns=["body", "target_altitude_km", "periapsis_altitude_km",
                                            "strategy", "v_inf_from_km_s", "v_inf_to_km_s"]),
        "crossover": pd.DataFrame(crossover, columns=["body", "target_altitude_km", "periapsis_altitude_km",
                                                      "two_burn_crossover_v_inf_km_s",
                                                      "three_burn_crossover_v_inf_km_s"]),
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
    """Per body, target and plane change: share won, median cost of the turn, median two_burn split."""
    bodies, names = cube_labels(dataset)
    totals = dataset["plane_change_delta_v"].values  # (S, B, V, T, P, I)
    best = dataset["plane_change_best_strategy"].values  # (B, V, T, P, I)
    coplanar = np.fmin.reduce(dataset["delta_v"].values, axis=0)  # (B, V, T, P): least coplanar cost
    with_turn = np.fmin.reduce(totals, axis=0)
    share = dataset["two_burn_first_plane_change"].values
    rows = []
    for b, body in enumerate(bodies):
        for t, target in enumerate(dataset["target_altitude"].values):
            for i, angle in enumerate(dataset["plane_change"].values):
                block = best[b, :, t, :, i]
                feasible = int((block >= 0).sum())
                cost = (with_turn[b, :, t, :, i] - coplanar[b, :, t, :])
                cost = cost[np.isfinite(cost)]
                split = share[b, :, t, :, i]
                split = split[np.isfinite(split)]
                row = [body, target, angle]
                row += [(block == s).sum() / feasible if feasible else np.nan for s in range(len(names))]
                row += [float(np.median(cost)) if cost.size else np.nan,
                        float(np.median(split)) if split.size else np.nan]
                rows.append(row)
    return pd.DataFrame(rows, columns=["body", "target_altitude_km", "plane_change_deg",
                                       *[f"share_won_{n}" for n in names],
                                       "median_cost_of_turn_m_s", "median_two_burn_first_share_deg"])


def _finite_tables(dataset: xr.Dataset) -> dict[str, pd.DataFrame]:
    """Finite-burn crossovers per periapsis and thrust; wins and gravity losses per thrust."""
    bodies, names = cube_labels(dataset)
    meanings = dataset["finite_status"].attrs["flag_meanings"].split()
    engine_codes = [meanings.index(m) for m in ("engine_cannot_capture", "propellant_exhausted", "surface_impact")]
    loss = (dataset["finite_delta_v"] - dataset["delta_v"]).values  # (S, B, V, T, P, F)
    best = dataset["finite_best_strategy"].values
    status = dataset["finite_status"].values
    thrusts, ratios = dataset["thrust"].values, dataset["thrust_to_weight"].values
    crossing, losses = [], []
    for b, body in enumerate(bodies):
        for t, target in enumerate(dataset["target_altitude"].values):
            for f, thrust in enumerate(thrusts):
                for p, periapsis in enumerate(dataset["periapsis_altitude"].values):
                    crossing.append((body, target, periapsis, thrust, ratios[f],
                                     float(dataset["finite_crossover_v_inf"].values[b, t, p, f]),
                                     float(dataset["finite_three_burn_crossover_v_inf"].values[b, t, p, f])))
                block = best[b, :, t, :, f]
                feasible = int((block >= 0).sum())
                for s, name in enumerate(names):
                    values = loss[s, b, :, t, :, f]
                    flown = values[np.isfinite(values)]
                    engine = np.isin(status[s, b, :, t, :, f], engine_codes).mean()
                    won = int((block == s).sum())
                    losses.append((body, target, thrust, ratios[f], name, won, won / feasible if feasible else np.nan,
                                   float(np.median(flown)) if flown.size else np.nan,
                                   float(flown.max()) if flown.size else np.nan, float(engine)))
    return {
        "finite_crossover": pd.DataFrame(crossing, columns=[
            "body", "target_altitude_km", "periapsis_altitude_km", "thrust_n", "thrust_to_weight",
            "two_burn_crossover_v_inf_km_s", "three_burn_crossover_v_inf_km_s"]),
        "finite_losses": pd.DataFrame(losses, columns=[
            "body", "target_altitude_km", "thrust_n", "thrust_to_weight", "strategy", "points_won",
            "share_of_feasible", "median_gravity_loss_m_s", "max_gravity_loss_m_s", "share_engine_limited"]),
    }


def _orbit_name(dataset: xr.Dataset, b: int, t: int) -> str:
    """'400 km circular orbit', or '400 x 20,000 km orbit' for an elliptical target."""
    target = float(dataset["target_altitude"].values[t])
    if "target_apoapsis_altitude" not in dataset:
        return f"{_km(target)} circular orbit"
    apoapsis = float(dataset["target_apoapsis_altitude"].values[b, t])
    return f"{target:,.0f} x {_km(apoapsis)} orbit (periapsis x apoapsis altitude)"


def _km(value: float) -> str:
    return f"{value:,.0f} km" if value >= 10 else f"{value:g} km"


def _speed(value: float) -> str:
    return "none" if not np.isfinite(value) else f"{value:.2f} km/s"


def _rows_to_show(count: int) -> list[int]:
    if count <= _MAX_ROWS:
        return list(range(count))
    return sorted({int(round(i)) for i in np.linspace(0, count - 1, _MAX_ROWS)})


def _status_lines(dataset: xr.Dataset, b: int, names: list[str]) -> list[str]:
    meanings = dataset["status"].attrs["flag_meanings"].split()
    lines = []
    for s, name in enumerate(names):
        codes, counts = np.unique(dataset["status"].values[s, b], return_counts=True)
        total = counts.sum()
        parts = [f"{meanings[c]} {n / total:.0%}" for c, n in zip(codes, counts, strict=True) if c != 0]
        if parts:
            lines.append(f"- `{name}` infeasible at part of the grid: {', '.join(parts)}.")
    return lines


def _answer(body: str, target: float, dataset: xr.Dataset, b: int, t: int, shares: pd.DataFrame) -> str:
    """One plain-language sentence pair for a body and target altitude."""
    periapses = dataset["periapsis_altitude"].values
    two_burn = cube_labels(dataset)[1].index("two_burn")
    feasible = np.flatnonzero(dataset["status"].values[two_burn, b, 0, t] == 0)
    here = shares[(shares.body == body) & (shares.target_altitude_km == target)].set_index("strategy")
    if here["points_won"].sum() == 0:
        return f"For a {_km(target)} orbit no strategy is feasible on this grid (see the status lines)."
    sentences = []
    lower = [p for p in feasible if periapses[p] < target]
    if lower:
        p = lower[0]
        index = {name: i for i, name in enumerate(cube_labels(dataset)[1])}
        delta_v = dataset["delta_v"].values
        phrases = []
        for name in cube_labels(dataset)[1][1:]:
            variable = crossover_variable(name)
            cross = dataset[variable].values[b, t, p]
            attrs = dataset[variable].attrs
            searched = f"{attrs.get('valid_min')} to {attrs.get('valid_max')} km/s"
            if np.isfinite(cross):
                phrases.append(f"`{name}` beats direct above {cross:.2f} km/s")
            elif (dataset["status"].values[index[name], b, 0, t, p] == 0
                  and (delta_v[index[name], b, :, t, p] < delta_v[index["direct"], b, :, t, p]).all()):
                phrases.append(f"`{name}` beats direct at every arrival speed ({searched} searched)")
            else:
                phrases.append(f"`{name}` does not beat direct between {searched}")
        lowest = f"with periapsis at {_km(periapses[p])} (the lowest feasible on the grid), "
        sentences.append(lowest + ", ".join(phrases))
    challengers = here.drop(index="direct")["max_saving_m_s"]
    if challengers.notna().any() and challengers.max() > 0:
        name = challengers.idxmax()
        row = here.loc[name]
        sentences.append(
            f"the largest saving over direct is {row.max_saving_m_s:.0f} m/s ({row.max_propellant_saving_kg:.0f} kg "
            f"of propellant) with `{name}` at {row.at_v_inf_km_s:g} km/s and periapsis "
            f"{_km(row.at_periapsis_altitude_km)}, reaching orbit {row.at_time_to_orbit_days:.1f} days after arrival"
        )
    else:
        sentences.append("direct capture is never beaten on this grid")
    won = ", ".join(f"`{name}` {share:.0%}" for name, share in here["share_of_feasible"].items() if share > 0)
    return f"For a {_km(target)} orbit: " + "; ".join(sentences) + f". Share of feasible points won: {won}."


def answers(dataset: xr.Dataset, tables: dict[str, pd.DataFrame] | None = None) -> dict[str, list[str]]:
    """Plain-language answer per body: one sentence group per target altitude."""
    tables = tables or summary_tables(dataset)
    bodies, _ = cube_labels(dataset)
    targets = dataset["target_altitude"].values
    return {
        body: [_answer(body, target, dataset, b, t, tables["shares"]) for t, target in enumerate(targets)]
        for b, body in enumerate(bodies)
    }


def _finite_section(dataset: xr.Dataset, tables: dict[str, pd.DataFrame], b: int, t: int) -> list[str]:
    """How the answer moves with thrust: crossovers at the lowest feasible periapsis, wins, losses."""
    bodies, names = cube_labels(dataset)
    body, target = bodies[b], float(dataset["target_altitude"].values[t])
    periapses = dataset["periapsis_altitude"].values
    two_burn = names.index("two_burn")
    feasible = [p for p in np.flatnonzero(dataset["status"].values[two_burn, b, 0, t] == 0) if periapses[p] < target]
    losses = tables["finite_losses"]
    here = losses[(losses.body == body) & (losses.target_altitude_km == target)]
    lines = ["With finite burns (gravity losses included; see the model in the cube's attributes):", ""]
    header = "| thrust | T/W | points won: " + " / ".join(names) + " | median (max) gravity loss, m/s: " + \
        " / ".join(names) + " | engine-limited |"
    lines += [header, "|---:|---:|---|---|---|"]
    sentences = []
    for f, thrust in enumerate(dataset["thrust"].values):
        rows = here[here.thrust_n == thrust].set_index("strategy").loc[names]
        ratio = float(dataset["thrust_to_weight"].values[f])
        won = " / ".join(f"{share:.0%}" if np.isfinite(share) else "-" for share in rows.share_of_feasible)
        loss = " / ".join("-" if not np.isfinite(m) else f"{m:.0f} ({x:.0f})"
                          for m, x in zip(rows.median_gravity_loss_m_s, rows.max_gravity_loss_m_s, strict=True))
        limited = " / ".join(f"{share:.0%}" for share in rows.share_engine_limited)
        lines.append(f"| {thrust:,.0f} N | {ratio:.3g} | {won} | {loss} | {limited} |")
        if feasible:
            p = feasible[0]
            finite = dataset["finite_crossover_v_inf"].values[b, t, p, f]
            impulsive = dataset["crossover_v_inf"].values[b, t, p]
            text = (f"pays above {finite:.2f} km/s" if np.isfinite(finite)
                    else "has no crossover with direct within the grid's speeds")
            sentences.append(f"at T/W {ratio:.3g} ({thrust:,.0f} N) `two_burn` with periapsis {_km(periapses[p])} "
                             f"{text} (impulsive: {_speed(impulsive)})")
    lines.append("")
    if sentences:
        lines += ["In short: " + "; ".join(sentences) + ".", ""]
    lines.append("Engine-limited: share of the grid where the engine cannot capture, runs out of mass, or the "
                 "trajectory meets the surface (per strategy).")
    lines.append("")
    return lines


def _plane_change_section(table: pd.DataFrame, body: str, target: float, names: list[str]) -> list[str]:
    here = table[(table.body == body) & (table.target_altitude_km == target)]
    lines = ["With a plane change (direct turns with its burn, two_burn splits the turn, three_burn turns at "
             "apoapsis):", "",
             "| plane change | points won: " + " / ".join(names) + " | median cost of the turn | "
             "median two_burn turn at its first burn |", "|---:|---|---:|---:|"]
    for row in here.itertuples(index=False):
        won = " / ".join("-" if not np.isfinite(v) else f"{v:.0%}"
                         for v in (getattr(row, f"share_won_{n}") for n in names))
        cost = "-" if not np.isfinite(row.median_cost_of_turn_m_s) else f"{row.median_cost_of_turn_m_s:.0f} m/s"
        split = "-" if not np.isfinite(row.median_two_burn_first_share_deg) else \
            f"{row.median_two_burn_first_share_deg:.2f} deg"
        lines.append(f"| {row.plane_change_deg:g} deg | {won} | {cost} | {split} |")
    return lines + ["", "Cost of the turn: least delta-v with the plane change minus least delta-v without it.", ""]


def render_summary(dataset: xr.Dataset, tables: dict[str, pd.DataFrame] | None = None,
                   figures: list[tuple[str, str, str]] | None = None) -> str:
    """
    Markdown report: per body and target, where each strategy wins and by how much.

    ``figures``: (body, file name, title) of PNG files beside the summary, shown in each body's
    section; none by default.
    """
    tables = tables or summary_tables(dataset)
    bodies, names = cube_labels(dataset)
    sentences = answers(dataset, tables)
    v_inf = dataset["v_inf"].values
    periapses = dataset["periapsis_altitude"].values
    best = dataset["best_strategy"].values
    points = int(np.prod([dataset.sizes[d] for d in dataset["best_strategy"].dims]))
    lines = [
        f"# {dataset.attrs.get('title', 'capsweep summary')}",
        "",
        f"> **Caution.** {dataset.attrs.get('comment', '')}",
        "",
        f"{dataset.attrs.get('summary', '')}",
        "",
        f"Grid: {len(bodies)} bodies x {v_inf.size} arrival speeds ({v_inf[0]:g} to {v_inf[-1]:g} km/s) x "
        f"{dataset.sizes['target_altitude']} target altitudes x {periapses.size} periapsis altitudes "
        f"({periapses[0]:g} to {periapses[-1]:g} km) = {points:,} points, {len(names)} strategies each. "
        f"Produced by {dataset.attrs.get('source', 'capsweep')}; {dataset.attrs.get('history', '')}.",
        "",
        "Strategies: " + dataset.attrs.get("strategies", ""),
        "",
    ]
    for b, body in enumerate(bodies):
        lines += [
            f"## {body.capitalize()}",
            "",
            f"GM {float(dataset['body_gm'][b]):.6g} m3/s2, mean radius {float(dataset['body_radius'][b]):,.1f} km, "
            f"lowest safe periapsis {float(dataset['body_safe_periapsis_altitude'][b]):g} km, sphere of influence "
            f"{float(dataset['sphere_of_influence_radius'][b]):,.0f} km, apoapsis bound "
            f"{float(dataset['apoapsis_bound'][b]):,.0f} km.",
            "",
        ]
        for _, name, title in [f for f in figures or [] if f[0] == body]:
            lines += [f"![{title}]({name})", ""]
        for t, target in enumerate(dataset["target_altitude"].values):
            lines += [f"### {body.capitalize()}, {_orbit_name(dataset, b, t)}", "",
                      sentences[body][t], ""]
            shown = _rows_to_show(periapses.size)
            lines += ["| periapsis | winner along v_inf (km/s) | two_burn = direct at | three_burn = direct at |",
                      "|---:|---|---:|---:|"]
            for p in shown:
                runs = _win_runs(best[b, :, t, p], v_inf, names)
                text = "; ".join(f"{label} {start:g}-{stop:g}" for label, start, stop in runs)
                lines.append(
                    f"| {_km(periapses[p])} | {text} | {_speed(dataset['crossover_v_inf'].values[b, t, p])} | "
                    f"{_speed(dataset['three_burn_crossover_v_inf'].values[b, t, p])} |"
                )
            if len(shown) < periapses.size:
                lines.append(f"\n(showing {len(shown)} of {periapses.size} periapsis altitudes; all are in wins.csv)")
            lines.append("")
            if "finite_delta_v" in dataset:
                lines += _finite_section(dataset, tables, b, t)
            if "plane_change" in tables:
                lines += _plane_change_section(tables["plane_change"], body, target, names)
        lines += _status_lines(dataset, b, names) + [""]
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


def write_summary(dataset: xr.Dataset, folder: str | Path) -> list[Path]:
    """
    Write summary.md and the CSV tables into ``folder``; return the paths written.

    The figures of :func:`sweep.report.figures.write_figures` already in ``folder`` are linked from
    summary.md (write them first); missing ones are left out.
    """
    from sweep.report.figures import figure_files  # here, not above: matplotlib loads only when a summary is written

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    tables = summary_tables(dataset)
    written = []
    for name, table in tables.items():
        path = folder / f"{name}.csv"
        with replacing(path) as temporary:
            table.to_csv(temporary, index=False, float_format="%.6g")
        written.append(path)
    path = folder / "summary.md"
    figures = [figure for figure in figure_files(dataset) if (folder / figure[1]).is_file()]
    with replacing(path) as temporary:
        temporary.write_text(render_summary(dataset, tables, figures), encoding="utf-8")
    return [path, *written]
