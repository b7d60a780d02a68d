"""``lowdim metrics``: every criterion with its direction, needs, K and source."""

from lowdim.cli import main
from lowdim.metrics import get_metric, metric_names


def test_lists_every_criterion_with_direction_needs_k_and_source(capsys):
    assert main(["metrics"]) == 0
    out = capsys.readouterr().out
    for name in metric_names():
        metric = get_metric(name)
        direction = "higher is better" if metric.higher_is_better else "lower is better"
        assert f"\n{name}  ({direction})\n" in "\n" + out
        assert metric.source in out
    assert "K: 1 <= k < n/2 (the range of Venna & Kaski's formula)" in out


def test_one_criterion_shows_what_it_needs_and_how_it_scales(capsys):
    assert main(["metrics", "silhouette", "stress", "rnx_auc", "fit_seconds"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("silhouette  (higher is better)")
    assert "needs: class labels" in out and "exact up to n = 10000" in out
    assert "stress  (lower is better)" in out and "all pairs up to n = 2000" in out
    assert "exact up to n = 4000" in out
    assert "recorded by the runner" in out
    assert "trustworthiness" not in out


def test_unknown_name_is_one_line_with_a_suggestion(capsys):
    assert main(["metrics", "stress", "trustworthyness"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.count("\n") == 1
    assert "(did you mean 'trustworthiness'?)" in captured.err
