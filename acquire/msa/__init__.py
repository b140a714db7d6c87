"""Measurement systems analysis: is the station itself trustworthy?

:mod:`~acquire.msa.records` holds the plain data the pieces share (a crossed gauge R&R study's
measurements, :class:`GrrData`). The gauge repeatability and reproducibility analysis (the ANOVA
method and the average-and-range method), its tables, JSON and pictures sit beside it, as does
the daily check standard.
"""
