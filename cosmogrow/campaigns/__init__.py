"""Many fits of mocks: mocks of a design fitted like the data, injection-recovery and
simulation-based calibration campaigns, their configuration, the durable journal of finished jobs,
the serial / process / Dask executors and the coverage statistics (docs/method.md#calibration).
"""
