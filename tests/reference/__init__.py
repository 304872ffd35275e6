"""The engine's rules written out one pump at a time: the specification the array engine is tested against.

Plain loops over one pump's records, as the rules read in words (DEVELOPERS.md,
docs/): ``hours`` (meters, fitments, pump hours), ``calendar`` (utilisation, hours to
dates), ``segments`` (wear segments and the series of one kind), ``status`` (words of
one kind and of a pump) and ``forecast`` (the fleet forecast built from these, fitted
by the engine's own batch fit). Independent of the engine's array steps, and slow
(milliseconds a pump): for tests and the benchmark only.
"""
