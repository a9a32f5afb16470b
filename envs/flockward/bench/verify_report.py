"""The verification report: a text table for the terminal, a Markdown file with PNG figures."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from flockward.bench.verify import FAIL, NOT_APPLICABLE, PASS, CheckResult, Figure, table_rows
from flockward.config.atomic import write_atomic

REPORT_NAME = "report.md"
HEADER = ("check", "measured", "bound", "status", "source")


def text_row(cells: Sequence[str], widths: Sequence[int]) -> str:
    """One table line, columns padded to ``widths`` (the last column unpadded)."""
    padded = [cell.ljust(width) for cell, width in zip(cells[:-1], widths, strict=False)]
    return "  ".join([*padded, cells[-1]])


def column_widths(results: Sequence[CheckResult]) -> list[int]:
    """Widths of every column but the last, wide enough for the header and every row."""
    rows = [HEADER, *table_rows(results)]
    return [max(len(row[k]) for row in rows) for k in range(len(HEADER) - 1)]


def summary(results: Sequence[CheckResult]) -> str:
    """'N checks: P pass, F fail, A not applicable'."""
    count = {s: sum(r.status == s for r in results) for s in (PASS, FAIL, NOT_APPLICABLE)}
    return (
        f"{len(results)} checks: {count[PASS]} pass, {count[FAIL]} fail, "
        f"{count[NOT_APPLICABLE]} not applicable"
    )


def draw(figure: Figure, folder: Path) -> Path:
    """Draw ``figure`` as ``folder/<stem>.png`` and return the path."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6.0, 4.0), dpi=100)
    for series in figure.series:
        ax.plot(series.x, series.y, "-o", markersize=3, label=series.label)
    if figure.log_x:
        ax.set_xscale("log")
    if figure.log_y:
        ax.set_yscale("log")
    ax.set_title(figure.title, fontsize=10)
    ax.set_xlabel(figure.xlabel)
    ax.set_ylabel(figure.ylabel)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)
    fig.tight_layout()
    path = folder / f"{figure.stem}.png"
    fig.savefig(path)
    plt.close(fig)
    return path


def markdown(results: Sequence[CheckResult], quick: bool, figures: dict[str, list[str]]) -> str:
    """The report's Markdown: summary, table, then each check's numbers and figures."""
    lines = [
        "# flockward verify",
        "",
        f"{summary(results)} ({'--quick' if quick else 'full'} run). A check passes when its "
        "measured value meets the bound; the source says where the bound comes from.",
        "",
        "| " + " | ".join(HEADER) + " |",
        "| " + " | ".join("---" for _ in HEADER) + " |",
    ]
    lines += ["| " + " | ".join(row) + " |" for row in table_rows(results)]
    lines += ["", "## Details", ""]
    for result in results:
        lines.append(f"- **{result.name}** ({result.status.upper()}): {result.detail}")
        for stem in figures.get(result.name, []):
            lines.append(f"\n  ![{stem}]({stem}.png)\n")
    return "\n".join(lines) + "\n"


def write_report(results: Sequence[CheckResult], folder: str | Path, quick: bool) -> Path:
    """Write ``folder/report.md`` and one PNG per figure; return the report's path."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    figures: dict[str, list[str]] = {}
    for result in results:
        for figure in result.figures:
            draw(figure, folder)
            figures.setdefault(result.name, []).append(figure.stem)
    path = folder / REPORT_NAME
    write_atomic(path, markdown(results, quick, figures))
    return path
