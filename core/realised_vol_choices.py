"""The realised-vol estimators by name and the default windows, shared by core.realised_vol and
the command line's options.

Plain tuples here, without numpy or pandas, so the command line can offer them
(``--cone-estimator``, ``--windows``) without importing the computations.
"""

#: Estimator names, in the order tables show them.
ESTIMATORS: tuple[str, ...] = ("close_to_close", "parkinson", "garman_klass", "rogers_satchell", "yang_zhang")
#: Window lengths in trading days (two weeks, a month, a quarter, half a year, a year).
DEFAULT_WINDOWS: tuple[int, ...] = (10, 21, 63, 126, 252)
