"""Write the report of a model version: figures, CSV tables and the HTML page."""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from pathlib import Path
from typing import Any

from service.registry import OutOfFold
from service.reporting.economics import Economics
from service.reporting.figures import draw_all
from service.reporting.page import render_page
from service.reporting.tables import ArmTables, arm_tables

__all__ = ["write_report"]


def _slug(label: str, taken: set[str]) -> str:
    slug = re.sub(r"[^A-Za-z0-9_-]+", "_", label).strip("_") or "arm"
    while slug in taken:
        slug += "_"
    taken.add(slug)
    return slug


def _write_csvs(directory: Path, tables: list[ArmTables]) -> dict[str, dict[str, str]]:
    files: dict[str, dict[str, str]] = {}
    taken: set[str] = set()
    for t in tables:
        slug = _slug(t.arm, taken)
        files[t.arm] = {}
        for kind in ("qini", "deciles", "calibration", "profit"):
            file = f"{kind}_{slug}.csv"
            getattr(t, kind).to_csv(directory / file, index=False)
            files[t.arm][kind] = file
    return files


def write_report(
    manifest: dict[str, Any],
    oof: OutOfFold,
    directory: Path,
    economics: Economics | None = None,
) -> Path:
    """Write ``index.html``, PNG plots and CSV tables into ``directory``; return the page.

    The figures use the out-of-fold predictions, never in-sample scores. ``economics``
    defaults to the value and costs recorded in the manifest. An existing report in
    ``directory`` is replaced only once the new one is complete.
    """
    economics = economics or Economics.from_dict(manifest["economics"])
    directory.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=".report-", dir=directory.parent))
    staging.chmod(0o755)  # mkdtemp makes it owner-only; the page is meant to be shared
    try:
        tables = arm_tables(oof, economics)
        figures = draw_all(staging, tables)
        csvs = _write_csvs(staging, tables)
        page = render_page(manifest, tables, economics, figures, csvs)
        (staging / "index.html").write_text(page, encoding="utf-8")
        if directory.exists():
            old = directory.with_name(f".{directory.name}-old")
            shutil.rmtree(old, ignore_errors=True)
            os.rename(directory, old)
            os.rename(staging, directory)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.rename(staging, directory)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return directory / "index.html"
