"""The cost model as data: the cost table (shipped defaults, per-user calibrated file), thread
configuration and the calibration that measures the engines and fits the table."""
