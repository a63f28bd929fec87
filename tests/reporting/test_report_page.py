"""The report is a complete page with plots, tables and a responsible-use caution."""

from __future__ import annotations

import re
from pathlib import Path

from service.registry import ModelRegistry, OutOfFold
from service.reporting import CAUTION, Economics, write_report
from service.training import TrainingResult

PNG = b"\x89PNG\r\n\x1a\n"


def test_training_writes_the_report_with_every_plot(trained: TrainingResult) -> None:
    page = trained.report.read_text(encoding="utf-8")
    directory = trained.report.parent
    for figure in ("qini.png", "deciles.png", "calibration.png", "profit.png"):
        assert f'src="{figure}"' in page
        data = (directory / figure).read_bytes()
        assert data.startswith(PNG) and len(data) > 10_000
    for arm in ("call", "email"):
        for table in ("qini", "deciles", "calibration", "profit"):
            assert (directory / f"{table}_{arm}.csv").is_file()
    assert "Responsible use" in page and "licensed practitioners" in page
    assert CAUTION.split(".")[0] in page
    assert "tea <small>v0001</small>" in page
    assert "contact cost 1" in page and "value 4" in page
    assert page.count("<table>") >= 7


def test_rebuilding_replaces_the_report_and_keeps_the_bundle_valid(
    trained: TrainingResult,
) -> None:
    registry = ModelRegistry(trained.path.parent.parent)
    oof = registry.out_of_fold("tea", "v0001")
    before = (trained.report.parent / "qini.png").read_bytes()
    economics = Economics.build(4.0, 0.5, trained.manifest["arms"])
    page = write_report(trained.manifest, oof, trained.report.parent, economics)
    assert "contact cost 0.5" in page.read_text()
    # Same data, same plot: the PNG carries no timestamp.
    assert (trained.report.parent / "qini.png").read_bytes() == before
    assert sorted(p.name for p in trained.path.iterdir()) == [
        "manifest.json",
        "model.joblib",
        "oof.npz",
        "report",
    ]
    registry.verify("tea", "v0001")


def test_labels_are_escaped(true_oof: OutOfFold, tmp_path: Path, trained: TrainingResult) -> None:
    labels = {"email": "<script>x</script>", "call": "call & co"}
    oof = OutOfFold(
        true_oof.scores,
        true_oof.y,
        true_oof.treatment.astype(object),
        true_oof.fold,
        None,
        [labels[a] for a in true_oof.arms],
        true_oof.control,
    )
    for old, new in labels.items():
        oof.treatment[oof.treatment == old] = new
    manifest = {
        **trained.manifest,
        "arms": oof.arms,
        "economics": {"value": 1.0, "cost": {a: 0.0 for a in oof.arms}},
    }
    manifest["metrics"] = {**manifest["metrics"], "arms": {}}
    page = write_report(manifest, oof, tmp_path / "report").read_text()
    assert "<script>" not in page
    assert "&lt;script&gt;x&lt;/script&gt; vs control" in page
    assert re.search(r"call &amp; co", page)
