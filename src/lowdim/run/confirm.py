"""Confirming a comparison on the whole file.

A comparison ranks its candidates on subsamples of the file's rows. Its leading settings (the
top three and the best PCA) are then refitted on the whole file — or, above
:data:`CONFIRM_ROWS` rows, on the largest random sample of that size, which the report names —
and scored with the same criteria, so the report can say whether the order held and on how
many rows. Each leader that has an out-of-sample ``transform`` is also fitted on the first
resample's rows and extended to every row (:class:`lowdim.run.extend.ExtendFromSample`), so
the report can say how far the subsample fit lies from the whole-file fit.

The confirmation is a run of its own into the comparison's folder (kind ``confirmation`` in
the store); the comparison's verdict and its blocks stay those of the main run.
"""

from __future__ import annotations

from typing import Any

from lowdim.run.compare import ComparePlan

__all__ = ["CONFIRM_ROWS", "EXTEND_TARGET", "confirmation_suite", "run_confirmation"]

CONFIRM_ROWS = 20_000
"""Most rows a confirmation fits; a larger file is confirmed on a random sample this size."""
EXTEND_TARGET = "lowdim.run.extend:ExtendFromSample"


def _has_transform(name: str) -> bool:
    from lowdim.methods import has_transform, method_names

    return name in method_names() and has_transform(name)


def confirmation_suite(plan: ComparePlan, leaders: list[tuple[str, dict]]) -> dict:
    """The confirmation suite of ``plan`` for ``leaders``: (display label, method spec) pairs,
    the spec as the comparison's jobs stored it (``name`` or ``import`` plus parameters)."""
    n = plan.n_samples
    rows = min(n, CONFIRM_ROWS)
    dataset = dict(plan.suite["datasets"][0])
    dataset.pop("subsample", None)
    dataset.pop("subsample_seed", None)
    if rows < n:
        dataset.update(subsample=rows, subsample_seed=0)
        dataset["label"] = f"{plan.file.stem}, {rows} of {n} rows"
    else:
        dataset["label"] = f"{plan.file.stem}, all {n} rows"
    methods = []
    for label, spec in leaders:
        methods.append({**spec, "label": label})
        name = spec.get("name")
        if name is not None and _has_transform(name):
            params = {k: v for k, v in spec.items() if k not in ("name", "import")}
            methods.append(
                {
                    "import": EXTEND_TARGET,
                    "method": name,
                    "params": params,
                    "rows": plan.resample_size,
                    "row_seed": 0,
                    "label": f"{label} [fitted on {plan.resample_size} rows, extended]",
                }
            )
    settings = dict(plan.suite["suite"])
    settings["seeds"] = [0]
    settings["description"] = f"confirmation of lowdim compare on {plan.file.name}"
    return {"suite": settings, "datasets": [dataset], "methods": methods}


def run_confirmation(
    plan: ComparePlan, leaders: list[tuple[str, dict]], *, n_jobs: int = 1, quiet: bool = False
) -> Any:
    """Run the confirmation of ``leaders`` into the plan's folder; return the run's summary."""
    from lowdim.run.runner import run_suite
    from lowdim.run.suites import suite_from_dict

    data = confirmation_suite(plan, leaders)
    suite = suite_from_dict(data, source=f"<lowdim compare {plan.file.name}: confirmation>")
    return run_suite(
        suite,
        plan.out_dir,
        n_jobs=n_jobs,
        quiet=quiet,
        plugins=plan.plugins,
        context={**plan.context, "confirmation": True},
        blocks="resamples",
        kind="confirmation",
    )
