"""How it is computed: the plan (spec -> jobs, feasibility), the result store, the
executors (serial, processes, Dask) and :func:`interkit.run.scan.run_scan`."""
