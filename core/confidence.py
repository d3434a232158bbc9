"""The default two-sided confidence of the ranges, shared by the app and the command line.

The one-sigma level N(1) - N(-1) = 0.6826894921370859 (z = 1 exactly; shown
as 68.27%): the plain range at this level is F*exp(-sigma^2 T/2 -/+ sigma sqrt T).
Kept as a literal here, without numpy or scipy, so the command line can read
it without importing the computations (a test checks it against scipy).
"""

#: N(1) - N(-1), the two-sided level of +/- one standard deviation (decimal).
DEFAULT_CONFIDENCE: float = 0.6826894921370859
