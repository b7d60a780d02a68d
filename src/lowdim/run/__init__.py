"""Running suites: TOML to jobs, the runner and its workers, per-job limits, the results store."""
