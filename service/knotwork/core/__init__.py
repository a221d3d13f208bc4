"""The numerical core of knotwork: pure numpy/scipy, no web imports."""
