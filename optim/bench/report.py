"""The targets of ``optim bench`` and the tables it prints (plain text) and writes (Markdown)."""

from __future__ import annotations

import math
from typing import List, Optional, Sequence

from optim.text import markdown_table

__all__ = ["TARGETS", "check_targets", "format_text", "format_markdown", "describe_blas"]

#: The limits every benchmark run is checked against.
TARGETS = {
    "fit_ratio": 2.0,  # fit time / bare X.T @ X time, for n >= fit_from_n
    "fit_from_n": 500,
    "sample_ratio": 3.0,  # tree sampling time / rng.random((N, n)) time
    "tree_median": 15_000,  # evaluations to the optimum on the hard problems, tree method
    "hard_problems": ("trap", "hiff", "ising-ring"),
    "baselines": ("hillclimb", "univariate"),
    "scaling_exponent": 1.6,
    "auto_to_best": 2.0,  # population "auto" against the best reliable fixed population
}


def _needed(report: dict):
    """``(runs needed for "reliable", seeds)`` from the report's settings."""
    settings = report.get("settings", {})
    seeds, reliable = settings.get("seeds", 10), settings.get("reliable", 0.9)
    return math.ceil(reliable * seeds - 1e-9), seeds


def _target(name: str, value, limit: str, met: bool, detail: str = "") -> dict:
    return {"name": name, "value": value, "limit": limit, "met": bool(met), "detail": detail}


def _fit_targets(report: dict) -> List[dict]:
    rows = [r for r in report.get("fit", []) if r["n"] >= TARGETS["fit_from_n"]]
    out = []
    for key, what in (
        ("fit_ratio", "DependencyTree.fit (with conditional tables)"),
        ("information_tree_ratio", "mutual information + spanning tree"),
    ):
        if not rows:
            out.append(
                _target(
                    f"{what} <= {TARGETS['fit_ratio']} x X.T @ X at n >= {TARGETS['fit_from_n']}",
                    None,
                    f"<= {TARGETS['fit_ratio']}",
                    False,
                    "no size >= 500 was measured",
                )
            )
            continue
        worst = max(rows, key=lambda r: r[key])
        out.append(
            _target(
                f"{what} <= {TARGETS['fit_ratio']} x X.T @ X at n >= {TARGETS['fit_from_n']}",
                round(worst[key], 3),
                f"<= {TARGETS['fit_ratio']}",
                worst[key] <= TARGETS["fit_ratio"],
                f"largest ratio at n = {worst['n']}",
            )
        )
    return out


def _sampling_target(report: dict) -> List[dict]:
    rows = report.get("sampling", [])
    name = f"tree sampling <= {TARGETS['sample_ratio']} x rng.random((N, n))"
    if not rows:
        return [_target(name, None, f"<= {TARGETS['sample_ratio']}", False, "not measured")]
    worst = max(rows, key=lambda r: r["ratio"])
    return [
        _target(
            name,
            round(worst["ratio"], 3),
            f"<= {TARGETS['sample_ratio']}",
            worst["ratio"] <= TARGETS["sample_ratio"],
            f"largest ratio at n = {worst['n']}",
        )
    ]


def _efficiency_targets(report: dict) -> List[dict]:
    rows = report.get("efficiency", [])
    needed, seeds = _needed(report)
    out = []
    for key in TARGETS["hard_problems"]:
        tree = next((r for r in rows if r["problem"] == key and r["method"] == "tree"), None)
        if tree is None:
            continue
        median = tree["median_evaluations"]
        met = tree["successes"] >= needed and median is not None and median <= TARGETS["tree_median"]
        out.append(
            _target(
                f"tree reaches the optimum of {tree['label']} in >= {needed}/{seeds} runs, "
                f"median <= {TARGETS['tree_median']:,}",
                {"successes": tree["successes"], "median": median},
                f">= {needed}/{seeds}, <= {TARGETS['tree_median']:,}",
                met,
                f"population {tree['population']}, budget {tree['budget']:,}",
            )
        )
        for method in TARGETS["baselines"]:
            base = next((r for r in rows if r["problem"] == key and r["method"] == method), None)
            if base is None:
                continue
            out.append(
                _target(
                    f"{method} does not reach the optimum of {tree['label']} within {base['budget']:,}",
                    {"successes": base["successes"], "median": base["median_evaluations"]},
                    "0 successes",
                    base["successes"] == 0,
                    f"population {base['population']}",
                )
            )
    return out


def _scaling_targets(report: dict) -> List[dict]:
    scaling = report.get("scaling")
    if not scaling:
        return []
    sizes = ", ".join(str(e["n"]) for e in scaling["sizes"])
    out = []
    for key, what in (("exponent_best_fixed", "best fixed population per n"), ("exponent_auto", "population auto")):
        value = scaling.get(key)
        out.append(
            _target(
                f"trap-3 scaling exponent ({what}, n = {sizes}) <= {TARGETS['scaling_exponent']}",
                None if value is None else round(value, 3),
                f"<= {TARGETS['scaling_exponent']}",
                value is not None and value <= TARGETS["scaling_exponent"],
                "" if value is not None else "some size had no reliable median",
            )
        )
    return out


def _auto_targets(report: dict) -> List[dict]:
    needed, seeds = _needed(report)
    out = []
    for entry in report.get("population", []):
        ratio = entry["auto_to_best_ratio"]
        met = ratio is not None and ratio <= TARGETS["auto_to_best"] and entry["auto_successes"] >= needed
        out.append(
            _target(
                f"population auto within {TARGETS['auto_to_best']} x the best fixed population on {entry['label']}",
                None if ratio is None else round(ratio, 3),
                f"<= {TARGETS['auto_to_best']}",
                met,
                f"auto {entry['auto_median']} ({entry['auto_successes']}/{seeds}); best fixed "
                f"{entry['best_fixed_population']}: {entry['best_fixed_median']}",
            )
        )
    return out


def check_targets(report: dict) -> List[dict]:
    """Every target with its measured value and whether it is met."""
    return (
        _fit_targets(report)
        + _sampling_target(report)
        + _efficiency_targets(report)
        + _scaling_targets(report)
        + _auto_targets(report)
    )


# -- tables ------------------------------------------------------------------------------------------------
def describe_blas(pools: Optional[Sequence[dict]]) -> str:
    if not pools:
        return "unknown (install threadpoolctl to see it)"
    return "; ".join(
        f"{p.get('internal_api', '?')} {p.get('version', '')} with {p.get('num_threads', '?')} "
        f"threads ({p.get('threading_layer', '?')}, {p.get('architecture', '?')})"
        for p in pools
    )


def _ms(seconds) -> str:
    return "-" if seconds is None else f"{1000 * seconds:.2f}"


def _ratio(value) -> str:
    return "-" if value is None else f"{value:.2f}"


def _evals(value) -> str:
    return "-" if value is None else f"{value:,.0f}"


def _runs(summary: dict) -> str:
    return f"{_evals(summary['median_evaluations'])} ({summary['successes']}/{summary['seeds']})"


def _tables(report: dict):
    """(title, header, rows, note) for every section present in ``report``."""
    machine = report.get("machine", {})
    loads = [machine.get("load_average"), machine.get("load_average_after_timing")]
    shown = " / ".join("-" if load is None else f"{load[0]:.2f}" for load in loads)
    yield (
        "Machine",
        ["python", "numpy", "cpus", "BLAS", "load before / after timing"],
        [
            [
                machine.get("python", "?"),
                machine.get("numpy", "?"),
                str(machine.get("cpus", "?")),
                describe_blas(machine.get("blas")),
                shown,
            ]
        ],
        "load = 1-minute load average; above the number of cpus other programs competed for the cores",
    )
    if report.get("fit"):
        yield (
            "Model fit against the bare float32 product X.T @ X (random binary data, N = 4n)",
            ["n", "N", "X.T @ X ms", "MI + tree ms", "ratio", "fit ms", "ratio"],
            [
                [
                    str(r["n"]),
                    str(r["samples"]),
                    _ms(r["product_seconds"]),
                    _ms(r["information_tree_seconds"]),
                    _ratio(r["information_tree_ratio"]),
                    _ms(r["fit_seconds"]),
                    _ratio(r["fit_ratio"]),
                ]
                for r in report["fit"]
            ],
            "ratio = minimum time over interleaved repetitions / minimum time of X.T @ X",
        )
    if report.get("sampling"):
        yield (
            "Sampling N candidates from a fitted tree against rng.random((N, n))",
            ["n", "N", "tree depth", "uniform ms", "sample ms", "ratio"],
            [
                [
                    str(r["n"]),
                    str(r["samples"]),
                    str(r["tree_depth"]),
                    _ms(r["uniform_seconds"]),
                    _ms(r["sample_seconds"]),
                    _ratio(r["ratio"]),
                ]
                for r in report["sampling"]
            ],
            "",
        )
    generation = report.get("generation")
    if generation:
        sec, share = generation["seconds"], generation["shares"]
        yield (
            f"One generation, tree method, {generation['problem']}, population {generation['population']}",
            ["part", "ms", "share"],
            [[k, _ms(sec[k]), f"{100 * share[k]:.1f} %"] for k in ("fit", "sample", "evaluate", "bookkeeping")]
            + [["whole step", _ms(sec["step"]), "100 %"]],
            f"median of {generation['generations_timed']} generations after the first",
        )
    throughput = report.get("throughput")
    if throughput:
        yield (
            f"Evaluation throughput, objective sleeping {1000 * throughput['sleep_seconds']:g} ms per candidate",
            [
                "mode",
                "workers",
                "evaluations",
                "seconds",
                "evaluations/s",
                "ideal/s",
                "overhead ms/eval",
                "worker start s",
            ],
            [
                [
                    r["mode"],
                    str(r["workers"]),
                    str(r["evaluations"]),
                    f"{r['seconds']:.3f}",
                    f"{r['per_second']:.1f}",
                    f"{r['ideal_per_second']:.1f}",
                    f"{r['overhead_ms']:.2f}",
                    f"{r['startup_seconds']:.2f}",
                ]
                for r in throughput["rows"]
            ],
            "overhead = measured time per evaluation minus the sleep time / workers"
            + "".join(f"; skipped {k['mode']}: {k['why']}" for k in throughput.get("skipped", [])),
        )
    memory = report.get("memory")
    if memory:
        if "error" in memory:
            rows = [[str(memory["n"]), str(memory["population"]), memory["error"], "", ""]]
        else:
            rows = [
                [
                    str(memory["n"]),
                    str(memory["population"]),
                    f"{memory['peak_mb']:.1f}",
                    f"{memory['baseline_mb']:.1f}",
                    f"{memory['run_mb']:.1f}",
                ]
            ]
        yield (
            f"Peak memory of a tree run on OneMax ({memory.get('generations', '?')} generations)",
            ["n", "population", "peak MB", "after imports MB", "run MB"],
            rows,
            memory["method"],
        )
    if report.get("efficiency"):
        rows = report["efficiency"]
        methods = list(dict.fromkeys(r["method"] for r in rows))
        problems = list(dict.fromkeys(r["label"] for r in rows))
        cell = {(r["label"], r["method"]): r for r in rows}
        first = rows[0]
        yield (
            f"Median evaluations to the optimum (successes/seeds), budget {first['budget']:,}, "
            f"population {first['population']}",
            ["problem"] + methods,
            [[p] + [_runs(cell[(p, m)]) for m in methods] for p in problems],
            "the median is over the successful runs; '-' when none succeeded",
        )
    if report.get("population"):
        section = report["population"]
        settings = [str(r["population"]) for r in section[0]["rows"]]
        yield (
            f"Fixed populations against population auto, tree method, budget {section[0]['budget']:,}",
            ["problem"] + settings + ["auto / best fixed"],
            [[e["label"]] + [_runs(r) for r in e["rows"]] + [_ratio(e["auto_to_best_ratio"])] for e in section],
            "best fixed = fewest median evaluations among populations reaching the optimum in >= 90 % of runs",
        )
    scaling = report.get("scaling")
    if scaling:
        rows = []
        for entry in scaling["sizes"]:
            best = entry["best_fixed"]
            rows.append(
                [
                    str(entry["n"]),
                    "-" if best is None else str(best["population"]),
                    "-" if best is None else _runs(best),
                    _runs(entry["auto"]),
                ]
            )
        rows.append(["exponent", "", _ratio(scaling["exponent_best_fixed"]), _ratio(scaling["exponent_auto"])])
        multiples = ", ".join(f"{m:g}n" for m in scaling["population_multiples"])
        yield (
            f"Scaling on {scaling['problem']}, tree method, budget {scaling['budget']:,}",
            ["n", "best fixed population", "evaluations", "auto"],
            rows,
            f"fixed populations tried: {multiples}; exponent = least-squares slope of log evaluations on log n",
        )
    if report.get("targets"):
        yield (
            "Targets",
            ["target", "measured", "limit", "status"],
            [[t["name"], _value(t["value"]), t["limit"], "met" if t["met"] else "NOT MET"] for t in report["targets"]],
            "",
        )


def _value(value) -> str:
    if isinstance(value, dict):
        return f"{_evals(value.get('median'))} ({value.get('successes')} successes)"
    return "-" if value is None else str(value)


def format_text(report: dict) -> str:
    """The tables as aligned plain text."""
    blocks = []
    for title, header, rows, note in _tables(report):
        widths = [max(len(str(c)) for c in column) for column in zip(header, *rows, strict=True)]
        lines = [
            title,
            "  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)),
            "  ".join("-" * w for w in widths),
        ]
        lines += ["  ".join(str(c).ljust(w) for c, w in zip(row, widths, strict=True)).rstrip() for row in rows]
        if note:
            lines.append(f"({note})")
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks) + "\n"


def format_markdown(report: dict) -> str:
    """The tables as Markdown (for the documentation)."""
    blocks = []
    for title, header, rows, note in _tables(report):
        lines = [f"**{title}**", ""] + markdown_table(header, rows, compact_rule=True)
        if note:
            lines += ["", f"_{note}_"]
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks) + "\n"
