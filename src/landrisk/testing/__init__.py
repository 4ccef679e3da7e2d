"""Test tooling: independent reference integrations and models with exactly known answers.

Nothing in the production path imports this package (an import contract in ``pyproject.toml`` checks
it); the test suite and the benchmarks do, to check the solver and the uncertainty layer.
"""
