"""Published figures beside measured ones: read with the suite, kept in the record, reported.

The numbers here are made up for the test: it checks the mechanism (reading, matching by
label, the difference measured minus published, the wording of bad input), not any paper.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from lowdim.analysis.engine import analyse_folder
from lowdim.errors import InputError
from lowdim.run.suites import suite_from_dict

CSV = """dataset,method,criterion,value,source,table,note
swiss_roll(n=60),pca,trustworthiness@10,0.5,A review (made up for this test),Table 9,
swiss_roll(n=60),pca,rnx_auc,0.25,A review (made up for this test),Table 9,from memory
s_curve(n=60),isomap,trustworthiness@10,0.9,A review (made up for this test),Table 9,
"""


def suite(csv: Path) -> dict:
    return {
        "suite": {
            "name": "pub",
            "seeds": [0],
            "neighbors": [10],
            "metrics": ["trustworthiness", "rnx_auc"],
            "published": str(csv),
            "unprinted": ["noise 0.05: the paper does not print it"],
        },
        "datasets": [{"name": "swiss_roll", "n": 60}, {"name": "s_curve", "n": 60}],
        "methods": [{"name": "pca"}, {"name": "classical_mds"}],
    }


def test_published_figures_sit_beside_the_measured_ones(tmp_path: Path, write_suite_store):
    csv = tmp_path / "published.csv"
    csv.write_text(CSV)

    def score(job):
        return {("trustworthiness", 10): 0.8, ("rnx_auc", 0): 0.4}

    folder = write_suite_store(tmp_path / "out", suite(csv), score)
    csv.unlink()  # the record holds the table: the report does not read the file again
    an = analyse_folder(folder)
    table = an.published.set_index(["dataset", "method", "criterion"])
    row = table.loc[("swiss_roll(n=60)", "pca", "trustworthiness@10")]
    assert row["measured"] == pytest.approx(0.8) and row["difference"] == pytest.approx(0.3)
    assert table.loc[("swiss_roll(n=60)", "pca", "rnx_auc"), "note"] == "from memory"
    missing = table.loc[("s_curve(n=60)", "isomap", "trustworthiness@10")]
    assert missing["measured"] != missing["measured"]  # NaN: this run has no isomap
    assert an.settings.unprinted == ("noise 0.05: the paper does not print it",)
    from lowdim.report import build_report

    page = build_report(folder).read_text()
    assert "Published and measured" in page and "not measured" in page
    assert "noise 0.05: the paper does not print it" in page


def test_a_bad_published_table_is_one_line(tmp_path: Path):
    csv = tmp_path / "published.csv"
    csv.write_text("dataset,method,value\nx,y,1\n")
    with pytest.raises(InputError, match="lacks the column\\(s\\) criterion, source, table"):
        suite_from_dict(suite(csv), str(tmp_path / "s.toml"))
    csv.write_text(CSV.replace("0.5,", "half,"))
    with pytest.raises(InputError, match="line 2: the value 'half' is not a number"):
        suite_from_dict(suite(csv), str(tmp_path / "s.toml"))
    with pytest.raises(InputError, match="is not a file"):
        suite_from_dict(suite(tmp_path / "none.csv"), str(tmp_path / "s.toml"))


def test_a_protocol_without_its_figures_says_so_and_lists_its_choices(
    tmp_path: Path, write_suite_store
):
    data = suite(tmp_path / "unused.csv")
    del data["suite"]["published"]

    def score(job):
        return {("trustworthiness", 10): 0.8, ("rnx_auc", 0): 0.4}

    folder = write_suite_store(tmp_path / "out", data, score)
    from lowdim.report import build_report

    page = build_report(folder).read_text()
    assert "gives no table of its figures" in page
    assert "noise 0.05: the paper does not print it" in page
