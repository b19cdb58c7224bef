"""The circuit model: circuit files, topology netlists, the periodic steady-state solver, the
per-slot stress in every operating state, and closed-form cross-checks.

Public API (plain SI floats everywhere):

* :func:`partsmatch.circuit.spec.load_circuit` / :func:`~partsmatch.circuit.spec.parse_circuit`
  -> :class:`~partsmatch.circuit.spec.CircuitSpec`; :func:`~partsmatch.circuit.spec.slot_names`,
  :func:`~partsmatch.circuit.spec.with_part_values`.
* :func:`partsmatch.circuit.stress.analyze` -> the ``partsmatch stress --json`` report;
  :func:`~partsmatch.circuit.stress.simulate_waveforms` for plots;
  :func:`~partsmatch.circuit.stress.steady_state` (one verified steady state: what a bench times).
* :mod:`partsmatch.circuit.formulas`: closed forms with their sources.
* :func:`partsmatch.circuit.plot.plot_waveforms` (matplotlib, imported on call).

Importing this package imports nothing heavy; :mod:`~partsmatch.circuit.solver`,
:mod:`~partsmatch.circuit.topologies` and :mod:`~partsmatch.circuit.stress` import numpy.
"""
