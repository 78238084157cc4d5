"""The run: request -> plan -> execute -> judge -> decide.

* :mod:`benchsuite.gate.request` -- a fresh run or ``--resume`` from request to decision
  (:func:`start_run`, called by ``benchsuite run`` and :func:`benchsuite.api.run_methods`);
* :mod:`benchsuite.gate.plan` -- the selection, methods, options and settings,
  all checked before anything is computed (:class:`RunPlan`);
* :mod:`benchsuite.gate.execute` -- the grid, the store and the outputs;
* :mod:`benchsuite.gate.judge` -- per-task rows and the run's final verdicts;
* :mod:`benchsuite.gate.decision` -- the one gate decision every output renders.

The command line only parses arguments and prints; imports point down to
runner, store and report, and neither store nor report imports gate.
"""
